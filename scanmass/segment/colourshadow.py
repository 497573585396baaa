"""Coloured cast shadows of mixed light cut from dark parts in photos (:func:`coloured_shadow_cut`).

Under two lights of different colours (a warm lamp and a cool window) each light's cast
shadow is lit by the other light: a paler shadow of another colour than the paper, which the
grain and paper-colour tests of :mod:`scanmass.segment.castshadow` do not take. Its colour
still follows from the lights. Take each linear channel over the paper white of the mat's
clear area, ``q = pixel / white``. The paper white is the sum of the lights' parts,
``white = L_A + L_B`` (per channel), so with ``f_A = L_A / white`` the paper in light A's
shadow, lit by B and by a share ``t`` of A (its penumbra), reads

    ``q = f_B + t f_A = 1 - (1 - t) f_A``.

The light a shadow pixel misses, ``1 - q``, has the colour of the blocked light (``f_A``,
per channel) at every depth of the shadow: the pixels of one light's shadow lie on one line
through the paper white in RGB, the "shadow line" of that light. Under one white light the
line is the grey axis (a shadow keeps the paper's colour), under mixed light it leans toward
the blocked light's colour. A part's face reads ``q = rho c`` with its own colour ``c``; a
dark face lies near the black end, where the shadow line of a coloured light has left the
grey axis by the most (its umbra, ``q = f_B``, has the other light's colour, and beyond it
the line runs on away from black).

The lines are measured around the part, on the paper just outside the found region that is
darkened (the shadows' penumbrae beyond the outline, paper for sure): the colour of ``1 - q``
there, the warmest and the coolest fifth of it giving the two lights' lines. A pixel of the
region is shadow when it lies nearer a shadow line than the face's colours (its colour line
through black, and the segment from the face to the paper white that its blurred edge follows)
and is darker than the paper, reached from the paper through such pixels (from outside the
region or from a hole wider than a shadow's reach: a narrower bore of a thick part shows its own
wall and shaded bottom), within a shadow's reach. A line is used only where the face lies far
from it (a face of the blocked light's colour, or grey in white light, lies on it: colour cannot
tell them); the cut is refused where no line is left or where the lines do not lean apart (one
light colour: the grain rules of :mod:`scanmass.segment.castshadow` hold there).

References
----------
The model of a pixel as the sum of the lights reaching it, each scaled by the surface's
reflectance per channel, is the common practice of illuminant estimation and shadow removal
(a diagonal model of the camera's channels).
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np

from scanmass.numeric import robust_sigma
from scanmass.segment.shadowlayer import (
    STRETCH_PX,
    ShadowCut,
    _edge_px,
    _filled,
    _new_layers,
    _settled_cut,
    _sweep_layer,
    _with_rim,
    roughness,
)

__all__ = [
    "ShadowLines",
    "shadow_lines",
    "coloured_shadow_cut",
    "LINES_MIN_SPREAD",
    "ColourSweep",
    "colour_sweep",
    "colour_sweep_cut",
    "SWEEP_DIRECTIONS",
    "SWEEP_MIN_SPREAD",
    "SWEEP_MAX_FACE_TINT",
    "tint_cut",
    "TINT_CUT_FACE",
    "TINT_CUT_LEVEL_STEP",
    "TINT_CUT_MIN_CONTRAST",
    "TINT_CUT_MAX_SHADOW",
    "TINT_CUT_DARK",
]

#: Smallest difference of tint (blue minus red over the mean, of the light a shadow pixel
#: misses) between the warmest and the coolest fifth of the penumbra around a part for two
#: lights of different colours.
LINES_MIN_SPREAD = 0.07
#: Smallest ratio of the face's distance from the shadow lines to its distance from its own
#: colour line (medians over the face) for the face to be told from the shadows by colour.
_FACE_APART = 4.0
#: Smallest distance (share of the paper white) of the face from the shadow lines.
_FACE_MIN_OFF = 0.01
#: Largest ratio of the face's levels (90th to 10th percentile over its interior) for a matte
#: face of one colour: the black plastic faces of the committed mixed-light renders
#: (tests/data/reallight/dev-mixed-black-*) span 1.1-1.7, the dark brushed steel of
#: mixed-steel-t10, which mirrors the lamps and the room, 6.
_FACE_LEVEL_SPREAD = 2.5
#: Level (share of the paper white) at and above which a pixel is no shadow.
_MAX_LEVEL = 0.9
#: Penumbra pixels used for the lines: levels between these shares of the paper white.
_RING_LEVELS = (0.2, 0.85)
#: Smallest count of penumbra pixels in the ring around a part.
_RING_MIN_PX = 200
#: Share of the ring's pixels (the warmest, the coolest) that gives each line.
_TAIL = 0.2


@dataclass(frozen=True)
class ShadowLines:
    """The shadow lines of the lights around one part (:func:`shadow_lines`).

    Attributes
    ----------
    lines : (2, 3) ndarray
        Per light, the colour of the light a shadow pixel misses (``1 - q`` over its mean),
        channels in the image's order: the one of lower tint (last channel minus first) first.
    spread : float
        The difference of their tints (last channel minus first, over the mean).
    """

    lines: np.ndarray
    spread: float


def shadow_lines(q: np.ndarray, part_mask: np.ndarray, reach_px: float) -> ShadowLines | None:
    """The shadow lines of the lights from the darkened paper just outside a found region.

    Parameters
    ----------
    q : (H, W, 3) float ndarray
        The crop's linear colour over the paper white, per channel (smoothed).
    part_mask : (H, W) bool ndarray
        The found region.
    reach_px : float
        How far (px) beyond the region the ring is read (a shadow's reach).

    Returns
    -------
    ShadowLines or None
        None with fewer than :data:`_RING_MIN_PX` penumbra pixels in the ring.

    Examples
    --------
    A warm lamp's and a cool light's penumbrae on either side of a square part, the warm lamp
    giving a share ``f_w`` of the paper white per channel (blue, green, red: the image's order),
    the cool light the rest. The cool light's shadow misses ``f_c = 1 - f_w``, over its mean
    (0.667, 0.556, 0.444) / 0.556 = (1.2, 1, 0.8); the warm lamp's misses ``f_w``, over its mean
    (0.75, 1, 1.25); their tints -0.4 and +0.5 lie 0.9 apart.

    >>> f_w = 0.5 * np.array([0.6, 0.8, 1.0]) / 0.9
    >>> q = np.ones((60, 60, 3), np.float32); mask = np.zeros((60, 60), bool); mask[20:40, 20:40] = True
    >>> t = np.linspace(0.0, 0.7, 10)[None, :, None]
    >>> q[20:40, 10:20] = 1 - (1 - t[:, ::-1]) * f_w  # the warm lamp's shadow, left
    >>> q[20:40, 40:50] = 1 - (1 - t) * (1 - f_w)  # the cool light's, right
    >>> found = shadow_lines(q, mask, 12.0)
    >>> np.round(found.lines, 2).tolist(), round(found.spread, 2)
    ([[1.2, 1.0, 0.8], [0.75, 1.0, 1.25]], 0.9)
    """
    m8 = part_mask.astype(np.uint8)
    outside = cv2.distanceTransform(1 - m8, cv2.DIST_L2, 3)
    level = q.mean(axis=2)
    ring = (outside > 1.5) & (outside < reach_px) & (level > _RING_LEVELS[0]) & (level < _RING_LEVELS[1])
    if np.count_nonzero(ring) < _RING_MIN_PX:
        return None
    miss = 1.0 - q[ring]
    miss = miss / np.maximum(miss.mean(axis=1, keepdims=True), 1e-6)
    tint = miss[:, 2] - miss[:, 0]
    lo, hi = np.quantile(tint, [_TAIL, 1.0 - _TAIL])
    lines = np.array([np.median(miss[tint <= lo], axis=0), np.median(miss[tint >= hi], axis=0)])
    lines /= lines.mean(axis=1, keepdims=True)
    spread = float((lines[1, 2] - lines[1, 0]) - (lines[0, 2] - lines[0, 0]))
    return ShadowLines(lines, abs(spread))


def _line_distance(q: np.ndarray, line: np.ndarray) -> np.ndarray:
    """(H, W): distance of each pixel from the shadow line ``q = 1 - s line`` at its own level."""
    miss = 1.0 - q
    return np.linalg.norm(miss - miss.mean(axis=2, keepdims=True) * line, axis=2)


def _like_by_colour(
    q: np.ndarray,
    level: np.ndarray,
    part_mask: np.ndarray,
    interior: np.ndarray,
    inside: np.ndarray,
    lines: ShadowLines,
    reach_px: float,
) -> np.ndarray | None:
    """The region's pixels nearer a usable shadow line than the face's colours, darker than the paper, within the reach.

    None where no line lies far enough from the face (colour cannot tell the face from the shadows).
    """
    face = np.median(q[interior], axis=0)
    face_colour = face / max(float(face.mean()), 1e-6)
    # the face's colours: the face in more or less light (its colour line through black), and
    # its edge blurred with the paper (the segment from the face to the paper white)
    along = np.linalg.norm(q - level[..., None] * face_colour, axis=2)
    miss, face_miss = 1.0 - q, 1.0 - face
    share = np.clip(miss @ face_miss / max(float(face_miss @ face_miss), 1e-9), 0.0, 1.0)
    blurred = np.linalg.norm(miss - share[..., None] * face_miss, axis=2)
    off_face = np.minimum(along, blurred)
    # a light's line is used where the face lies far from it (both it and the face's edge line
    # run through the paper white, so they then stay apart at every depth)
    floor = max(_FACE_MIN_OFF, _FACE_APART * float(np.median(off_face[interior])))
    off = [_line_distance(q, line) for line in lines.lines]
    off = [d for d in off if float(np.median(d[interior])) >= floor]
    if not off:
        return None
    off_line = np.minimum.reduce(off)
    return part_mask & (off_line < off_face) & (level < _MAX_LEVEL) & (inside <= reach_px)


def face_reading(
    colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray, reach_px: float, min_spread: float
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, ShadowLines, tuple[float, float]] | None:
    """A face and the shadow lines around it, read for a cut by colour.

    Returns the crop's colour as shares of the paper's (blurred by 1 px), its level, the distance
    inside the region, the region's interior beyond a shadow's reach, the penumbrae's shadow lines
    and the spread of the interior's levels (its 90th percentile over its 10th); None where the
    region or its interior is too small or the lines lean apart by less than ``min_spread``.
    """
    mask8 = part_mask.astype(np.uint8)
    if mask8.sum() < 50:
        return None
    q = cv2.GaussianBlur((colour_lin / np.asarray(paper_rgb, np.float32)).astype(np.float32), (0, 0), 1.0)
    lines = shadow_lines(q, part_mask, reach_px)
    if lines is None or lines.spread < min_spread:
        return None
    inside = cv2.distanceTransform(mask8, cv2.DIST_L2, 3)
    interior = inside > min(reach_px + 2.0, 0.75 * float(inside.max()))
    if np.count_nonzero(interior) < 50:
        return None
    level = q.mean(axis=2)
    lo, hi = np.quantile(level[interior], [0.1, 0.9])
    return q, level, inside, interior, lines, (float(lo), float(hi))


def _matte_face(
    colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray, reach_px: float, min_spread: float
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, ShadowLines] | None:
    """A matte face and the shadow lines around it (:func:`face_reading`).

    None also where the face's levels spread as a face that mirrors the lights (metal) does: its
    own pixels then take the shadow lines' colours.
    """
    read = face_reading(colour_lin, part_mask, paper_rgb, reach_px, min_spread)
    if read is None:
        return None
    lo, hi = read[5]
    if hi > _FACE_LEVEL_SPREAD * max(lo, 1e-6):
        return None
    return read[:5]


def coloured_shadow_cut(
    colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray, reach_px: float
) -> ShadowCut | None:
    """The coloured cast shadows (mixed light) inside a region found as a dark part.

    Parameters
    ----------
    colour_lin : (H, W, 3) float ndarray
        A crop of the photo in linear light, with paper all around the region.
    part_mask : (H, W) bool ndarray
        The found region (holes cleared).
    paper_rgb : (3,) ndarray
        The local paper white (linear), e.g. :attr:`~scanmass.segment.shadow.ShadowRisk.paper_rgb`.
    reach_px : float
        How far (px) inside the region a shadow can reach, and beyond it the ring read for the
        lines (:func:`~scanmass.segment.shadow.shadow_band_px`).

    Returns
    -------
    ShadowCut or None
        The cut (``direction`` None: it was not found by a sweep), or None where the face is
        not of one colour and level (a metal's, mirroring the lights: its levels spread more
        than :data:`_FACE_LEVEL_SPREAD` times), the lights have one colour (lines less than :data:`LINES_MIN_SPREAD` apart), the face lies near a
        shadow line, nothing is cut, or the cut would take more than
        :data:`~scanmass.segment.castshadow.CUT_MAX_SHARE` of the region.

    Examples
    --------
    A dark bluish face (0.07 of the paper) with the cool light's shadow (lit by a warm lamp, its
    umbra warm) inside its found region on the right, and the warm lamp's paler, cool shadow
    beyond it on the left: the warm band is cut, the face kept.

    >>> warm = np.array([0.6, 0.8, 1.0])  # blue, green, red: the image's channel order
    >>> f_w = 0.3 * warm / warm.mean(); f_c = 1 - f_w
    >>> img = np.ones((80, 80, 3), np.float32); mask = np.zeros((80, 80), bool); mask[20:60, 20:60] = True
    >>> img[20:60, 20:52] = 0.07 * np.array([1.08, 0.97, 0.95])
    >>> img[20:60, 52:60] = f_w  # the umbra of the cool light inside the region
    >>> t = np.linspace(0.05, 0.95, 12)[None, :, None]
    >>> img[20:60, 60:72] = 1 - (1 - t) * f_c  # its penumbra beyond the outline
    >>> img[20:60, 8:20] = 1 - (1 - t[:, ::-1]) * f_w  # the warm lamp's, on the left
    >>> found = coloured_shadow_cut(img, mask, np.ones(3), 12.0)
    >>> bool(found.cut[20:60, 53:60].all()), bool(found.cut[20:60, 20:51].any()), found.edge_px
    (True, False, 40.0)
    """
    read = _matte_face(colour_lin, part_mask, paper_rgb, reach_px, LINES_MIN_SPREAD)
    if read is None:
        return None
    q, level, inside, interior, lines = read
    like = _like_by_colour(q, level, part_mask, interior, inside, lines, reach_px)
    if like is None:
        return None  # the face lies near the shadow lines: colour cannot tell them apart
    # reached from the paper: outside the region, or in a hole wider than a shadow's reach (a
    # narrower bore of a thick part shows its own lit wall and shaded bottom, not a cast shadow)
    paper = ~_filled(part_mask)
    _, holes, hole_stats, _ = cv2.connectedComponentsWithStats((~part_mask & ~paper).astype(np.uint8), connectivity=8)
    wide = hole_stats[:, cv2.CC_STAT_AREA] > np.pi * reach_px**2
    paper |= (holes > 0) & wide[holes]
    near_paper = cv2.dilate(paper.astype(np.uint8), np.ones((3, 3), np.uint8)).astype(bool)
    count, labels = cv2.connectedComponents(like.astype(np.uint8), connectivity=8)
    touching = np.unique(labels[like & near_paper])
    cut = np.isin(labels, touching[touching > 0])
    settled = _settled_cut(cut, part_mask)  # pieces the cut parts from the face go with it
    if settled is None:
        return None
    cut, keep = settled
    # the rim of blurred paper left between the cut and the paper would enclose the cut as a
    # false hole once painted: it goes with the cut (as for a cut by grain)
    cut = _with_rim(cut, part_mask)
    keep = part_mask & ~cut
    n_cut = int(np.count_nonzero(cut))
    rough = roughness(level)
    return ShadowCut(
        cut=cut,
        cut_px=n_cut,
        edge_px=_edge_px(cut, keep),
        texture_face=float(np.median(rough[keep])),
        texture_shadow=float(np.median(rough[cut])),
        level_face=float(np.median(level[keep])),
        level_shadow=float(np.median(level[cut])),
        direction=None,
    )


#: Directions (evenly spread over the full turn) a colour sweep (:func:`colour_sweep`) tries.
SWEEP_DIRECTIONS = 48
#: Smallest difference of tint between the shadow lines (as :data:`LINES_MIN_SPREAD`) for a sweep by colour
#: (:func:`colour_sweep`): it cuts by colour alone, where the face's own test has let it pass, so the two lights
#: must differ plainly. On the committed renders (tests/data/reallight) the penumbrae of soft-black-t15 (one
#: softbox) spread 0.071-0.078, those of dev-mixed-black4-t25 (a warm lamp and a cool window) 0.16-0.34.
SWEEP_MIN_SPREAD = 0.12
#: Largest tint of the face (red less blue over the mean, of its median colour over the paper white) for a sweep
#: by colour: a coloured face (brass) casts its own colour on the paper around it, so the penumbrae lean apart
#: by its reflection, not by a second light. On the committed renders (tests/data/reallight) the brass faces of
#: spot-brass-t10, lens-spot-brass-t30 and dev-spot-brass3-t20 (one spot) read +1.04 to +1.08, the black
#: faces of dev-mixed-black4-t25 (mixed light) -0.13 to -0.16.
SWEEP_MAX_FACE_TINT = 0.5
#: Smallest share of a sweep's layer that must look like a shadow by colour for the run to go on.
_LAYER_SHARE = 0.5


@dataclass(frozen=True)
class ColourSweep:
    """A region's shadow-like pixels by colour (mixed light) and its best sweep (:func:`colour_sweep`).

    Attributes
    ----------
    like : (H, W) bool ndarray
        The region's pixels nearer a shadow line of the lights than the face's colours.
    direction : (float, float)
        Unit vector (x, y px) of the sweep whose run of shadow-like layers holds the most net votes.
    score : float
        Those net votes (shadow-like pixels less the others in the run's layers).
    length_px : int
        The run's length (layers) along ``direction``.
    metal : bool
        Whether the face is a metal's (:func:`~scanmass.segment.metalshadow.metal_colour_sweep`), not matte.
    """

    like: np.ndarray
    direction: tuple[float, float]
    score: float
    length_px: int
    metal: bool = False


def _colour_run(outer8: np.ndarray, direction: np.ndarray, like: np.ndarray, reach_px: float) -> tuple[int, float]:
    """(layers, net votes) of the run of shadow-like layers from the outer outline along ``direction``, within the reach.

    ``outer8`` is the region with its holes filled: a sweep steps off the outer outline only (a step
    into a hole is no step off the part).
    """
    run, score = 0, 0.0
    for k, new in _new_layers(outer8, direction, int(np.floor(reach_px)) + 1):
        n, hit = np.count_nonzero(new), np.count_nonzero(new & like)
        if hit < _LAYER_SHARE * n:
            break
        run, score = k, score + 2.0 * hit - n
    return run, score


def colour_sweep(
    colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray, reach_px: float
) -> ColourSweep | None:
    """A matte region's shadow-like pixels by colour under two lights of different colours, and its best sweep.

    :func:`coloured_shadow_cut` takes every shadow-like pixel reached from the paper; it serves the
    parts the dark-face test (:func:`~scanmass.segment.castshadow.dark_tinted_face`) takes. A matte
    face that test misses (its shadow's grain and level told no cut either) may still hold scattered
    pixels of a shadow line's colour; a cast shadow lies along the light, on one side of the part: of
    the :data:`SWEEP_DIRECTIONS` sweeps from the outer outline, the one whose layers hold the most
    shadow-like pixels net (each layer at least half of them, within the reach) finds its side and
    its depth, and scattered face pixels hold up no such run. A face whose levels spread as a
    metal's do (over :data:`_FACE_LEVEL_SPREAD` times) mirrors the lights and the room: its own
    pixels take the lines' colours in runs as well, and it is refused here
    (:func:`~scanmass.segment.metalshadow.metal_colour_sweep` sweeps it by the shadows' smoothness as well).

    Returns
    -------
    ColourSweep or None
        None where the face's levels spread as a metal's, the face is coloured (tint over
        :data:`SWEEP_MAX_FACE_TINT`), the lights do not plainly differ in colour (lines less than
        :data:`SWEEP_MIN_SPREAD` apart), the face lies near both shadow lines, or no sweep runs a
        layer.

    Examples
    --------
    A dark matte face (0.06-0.10 of the paper), with the cool light's shadow (lit by the warm lamp,
    so warm) 6 px deep inside its found region on the right and the warm lamp's shadow (cool)
    beyond its left edge: the sweep runs to the right (+x), 6 layers.

    >>> rng = np.random.default_rng(1)
    >>> warm = np.array([0.6, 0.8, 1.0])  # blue, green, red: the image's channel order
    >>> f_w = 0.4 * warm / warm.mean(); f_c = 1 - f_w
    >>> img = np.ones((80, 80, 3), np.float32); mask = np.zeros((80, 80), bool); mask[20:60, 20:60] = True
    >>> img[20:60, 20:54] = (0.06 + 0.04 * rng.random((40, 34, 1))) * np.array([1.05, 1.0, 0.95])
    >>> t = np.linspace(0.05, 0.95, 12)[None, :, None]
    >>> img[20:60, 54:60] = f_w + 0.05 * f_c  # the cool light's umbra inside the region
    >>> img[20:60, 60:72] = 1 - (1 - t) * f_c  # its penumbra beyond the outline
    >>> img[20:60, 8:20] = 1 - (1 - t[:, ::-1]) * f_w  # the warm lamp's, on the left
    >>> found = colour_sweep(img, mask, np.ones(3), 12.0)
    >>> [round(v, 2) for v in found.direction], found.length_px
    ([1.0, 0.0], 6)
    >>> stripes = 0.04 + 0.36 * ((np.arange(34) // 4) % 2)[None, :, None]  # brushed metal's lit and dark sectors
    >>> img[20:60, 20:54] = stripes * np.array([1.05, 1.0, 0.95])
    >>> colour_sweep(img, mask, np.ones(3), 12.0) is None  # levels spread as a metal face's
    True
    """
    read = _matte_face(colour_lin, part_mask, paper_rgb, reach_px, SWEEP_MIN_SPREAD)
    if read is None:
        return None
    q, level, inside, interior, lines = read
    face = np.median(q[interior], axis=0)
    if abs(float(face[2] - face[0])) > SWEEP_MAX_FACE_TINT * max(float(face.mean()), 1e-6):
        return None  # a coloured face: its own reflection tints the paper around it
    like = _like_by_colour(q, level, part_mask, interior, inside, lines, reach_px)
    if like is None:
        return None
    best: tuple[float, int, np.ndarray] | None = None
    outer8 = _filled(part_mask).astype(np.uint8)
    for a in np.arange(SWEEP_DIRECTIONS) * (2.0 * np.pi / SWEEP_DIRECTIONS):
        d = np.array([np.cos(a), np.sin(a)])
        run, score = _colour_run(outer8, d, like, reach_px)
        if run > 0 and (best is None or score > best[0]):
            best = (score, run, d)
    if best is None:
        return None
    return ColourSweep(like, (float(best[2][0]), float(best[2][1])), best[0], best[1])


def colour_sweep_cut(
    colour_lin: np.ndarray,
    part_mask: np.ndarray,
    paper_rgb: np.ndarray,
    reach_px: float,
    sweep: ColourSweep,
    direction: tuple[float, float],
) -> ShadowCut | None:
    """The cut of a :func:`colour_sweep` along ``direction`` (the photo's, :func:`colour_sweep`'s own or agreeing with it).

    The run of shadow-like layers along ``direction`` (each at least half shadow-like by colour,
    within the reach) is cut, with the pieces it parts from the face and the rim of blurred paper
    beside it (as :func:`coloured_shadow_cut` cuts). None where no layer runs, fewer than
    :data:`~scanmass.segment.castshadow.STRETCH_PX` pixels are cut, or the cut would take more than
    :data:`~scanmass.segment.castshadow.CUT_MAX_SHARE` of the region.

    Examples
    --------
    The face of :func:`colour_sweep`'s example, cut along its sweep: the shadow's 6 columns go, the face stays.

    >>> rng = np.random.default_rng(1)
    >>> warm = np.array([0.6, 0.8, 1.0]); f_w = 0.4 * warm / warm.mean(); f_c = 1 - f_w
    >>> img = np.ones((80, 80, 3), np.float32); mask = np.zeros((80, 80), bool); mask[20:60, 20:60] = True
    >>> img[20:60, 20:54] = (0.06 + 0.04 * rng.random((40, 34, 1))) * np.array([1.05, 1.0, 0.95])
    >>> t = np.linspace(0.05, 0.95, 12)[None, :, None]
    >>> img[20:60, 54:60] = f_w + 0.05 * f_c
    >>> img[20:60, 60:72] = 1 - (1 - t) * f_c
    >>> img[20:60, 8:20] = 1 - (1 - t[:, ::-1]) * f_w
    >>> found = colour_sweep(img, mask, np.ones(3), 12.0)
    >>> cut = colour_sweep_cut(img, mask, np.ones(3), 12.0, found, found.direction)
    >>> bool(cut.cut[20:60, 54:60].all()), bool(cut.cut[20:60, 20:53].any()), cut.length_px
    (True, False, 6.0)
    """
    outer8 = _filled(part_mask).astype(np.uint8)
    d = np.asarray(direction, float)
    run, _ = _colour_run(outer8, d, sweep.like, reach_px)
    if run == 0:
        return None
    cut = _sweep_layer(outer8, run * d) & part_mask
    if np.count_nonzero(cut) < STRETCH_PX:
        return None
    settled = _settled_cut(cut, part_mask)  # pieces the cut parts from the face go with it
    if settled is None:
        return None
    cut, keep = settled
    cut = _with_rim(cut, part_mask)
    keep = part_mask & ~cut
    level = (colour_lin / np.asarray(paper_rgb)).mean(axis=2)
    rough = roughness(level)
    return ShadowCut(
        cut=cut,
        cut_px=int(np.count_nonzero(cut)),
        edge_px=_edge_px(cut, keep),
        texture_face=float(np.median(rough[keep])),
        texture_shadow=float(np.median(rough[cut])),
        level_face=float(np.median(level[keep])),
        level_shadow=float(np.median(level[cut])),
        direction=(float(d[0]), float(d[1])),
        length_px=float(run),
    )


#: Least yellowness of a face (:func:`tint_cut`: one less its blue over its green, each over the paper
#: white's, median over the face) for its edge against a neutral shadow to be placed by its tint: the
#: brass faces of the committed spot renders (tests/data/reallight) read 0.32-0.49, steel and black
#: plastic under 0.1.
TINT_CUT_FACE = 0.2
#: Largest step of level from the shadow up to the face, in units of their pixels' noise (:func:`tint_cut`), for the
#: edge to be placed by the tint: above it the level step places the edge (the grain rules of
#: :mod:`scanmass.segment.castshadow` hold there). On the committed spot renders (tests/data/reallight) the thin
#: brass parts whose shadow was kept or whose face was cut read -0.8 to +0.34 (dev-spot-brass2-t27's bracket, its
#: face 1.16 times its shadow's level); the brass bracket of dev-spot-brass-t22, cut well by its level, 1.8 (the
#: tint placed its edge 6 % out), that of spot-brass-t10b 1.3.
TINT_CUT_LEVEL_STEP = 1.0
#: Smallest step of yellowness from the shadow up to the face, in units of their pixels' noise, for :func:`tint_cut`:
#: three sigma (common practice for a difference told from noise). The spot renders' brass parts read 3.3-6.4.
TINT_CUT_MIN_CONTRAST = 3.0
#: Largest level (over the paper white) of a pixel :func:`tint_cut` takes as shadow, unless the cut took it
#: already: the faces and shadows it is for read 0.015-0.03; the face's rim against the lit paper is brighter.
TINT_CUT_DARK = 0.1
#: Largest median tint (face 1, neutral 0) of what the tint cuts: above it the shadow is lit by the
#: face's own reflection and the contrast is too weak to place the edge.
TINT_CUT_MAX_SHADOW = 0.45


#: Pixels (dilations) beside a dark shadow pixel over which :func:`tint_cut` takes a neutral pixel the cut took already
#: (a soft shadow's fade brighter than :data:`TINT_CUT_DARK`): an edge's blur at the photos' scale.
_TINT_BESIDE_PX = 2
#: Largest tint (face 1, neutral 0) and level (over the paper white) of a pixel of a neutral shadow's core in
#: :func:`tint_cut`, beside which the shadow's blurred rim goes with the cut. A blend of the face (level ``f``) with
#: the lit paper (share ``c``) reads the level ``f (1 - c) + c`` and about the tint ``f (1 - c) / level`` (the face's
#: share of the light, by the edge model: common practice); under a quarter of the face's tint it is brighter than
#: ``4 f (1 - c)``, 0.06-0.12 for the faces :data:`TINT_CUT_DARK` is for (0.015-0.03): a core pixel is darker.
_TINT_CORE_TINT = 0.25
_TINT_CORE_LEVEL = 0.05
#: Pixels (dilations) of the blurred paper rim between a shadow and the paper that :func:`tint_cut` reaches across.
_TINT_RIM_PX = 3


def _noise(a: np.ndarray, b: np.ndarray) -> float:
    """The noise of the difference of two samples' medians per pixel: their robust sigmas (MAD) added in quadrature."""
    return max(float(np.hypot(robust_sigma(a), robust_sigma(b))), 1e-9)


def tint_cut(
    colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray, cut: ShadowCut, reach_px: float
) -> ShadowCut | None:
    """A cast-shadow cut of a yellow (brass) face placed again where its yellowness falls to half.

    Under a hard white light the cast shadow keeps the paper's colour (its yellowness, one less the
    blue-over-green ratio over the paper white's, is 0), while a brass face is yellow whatever its
    level. Where the face stands no more than :data:`TINT_CUT_LEVEL_STEP` times its pixels' noise above its
    shadow's level, the level's step cannot place the edge, but the tint can where its step is at least
    :data:`TINT_CUT_MIN_CONTRAST` times the noise: the yellowness normalised to the face's median (1 on the
    face, 0 on a neutral shadow), smoothed over 0.7 px; the pixels of the region within ``reach_px`` + 2 px
    of its outline where it is under one half, dark (under :data:`TINT_CUT_DARK`, or cut already and beside a
    dark one, or within the blurred rim's reach of the shadow's core: neutral and darker than any blend of the
    face with the lit paper, :data:`_TINT_CORE_TINT`, :data:`_TINT_CORE_LEVEL`), reached from the paper outside
    the outline, are the cut; pixels of ``cut`` deeper in the region or outside it (a fade beyond the outline)
    stay cut, and so does the shadow's rim beyond the outline beside the cut, neutral and darker than half the
    paper (left, it would stay a strip of dark pixels around the painted cut). The face's blurred rim against
    the lit paper (bright, of the paper's colour on its outer half) is left to the face.

    ``part_mask`` should be the region as the photo shows it: on a raised face, its top edge where the photo
    shows it (the shadow beyond that edge is the shadow to cut).

    Returns None where the face is not yellow enough (:data:`TINT_CUT_FACE`), its level stands
    apart from its shadow's, the tint's step is within the noise, fewer than 50 shadow pixels are found,
    or the shadow's own median tint exceeds :data:`TINT_CUT_MAX_SHADOW` (the tint contrast is weak).

    The noise of a step is the two samples' robust sigmas (1.4826 times the median absolute deviation, for
    normal noise) added in quadrature.

    Examples
    --------
    A brass-like face 30 px wide (0.02 0.015 0.006 of the paper, as B, G, R) with its neutral shadow
    (0.017 in each channel) 6 px wide on its right, of which the cut found 2 px:

    >>> img = np.ones((40, 60, 3), np.float32)
    >>> img[5:35, 10:40] = (0.006, 0.015, 0.02)
    >>> img[5:35, 40:46] = 0.017
    >>> mask = np.zeros((40, 60), bool); mask[5:35, 10:46] = True
    >>> old = np.zeros_like(mask); old[5:35, 44:46] = True
    >>> c = ShadowCut(old, int(old.sum()), 30.0, 0.1, 0.1, 0.017, 0.017)
    >>> new = tint_cut(img, mask, np.ones(3, np.float32), c, 8.0)
    >>> int(new.cut[20].sum()), int(new.cut[20, 40:46].sum())
    (6, 6)
    """
    paper = np.maximum(np.asarray(paper_rgb, np.float64), 1e-9)
    q = cv2.GaussianBlur((colour_lin / paper).astype(np.float32), (0, 0), 0.7)
    level = q.mean(axis=2)
    yellow = 1.0 - q[..., 0] / np.maximum(q[..., 1], 1e-6)  # channels as stored: blue, green, red
    kernel = np.ones((3, 3), np.uint8)
    interior = cv2.erode(part_mask.astype(np.uint8), kernel, iterations=4).astype(bool)
    interior &= ~cv2.dilate(cut.cut.astype(np.uint8), kernel, iterations=3).astype(bool)
    if np.count_nonzero(interior) < 50:
        return None
    face_yellow = float(np.median(yellow[interior]))
    if face_yellow < TINT_CUT_FACE:
        return None
    tint = yellow / face_yellow
    # depth from the outer outline only: the holes' rims keep the cut's decision (their own shadows are left in)
    count, comp = cv2.connectedComponents((~part_mask).astype(np.uint8), connectivity=4)
    rim = np.unique(np.concatenate([comp[0], comp[-1], comp[:, 0], comp[:, -1]]))
    filled = ~np.isin(comp, rim[rim > 0]) if count > 1 else np.ones_like(part_mask)
    depth = cv2.distanceTransform(filled.astype(np.uint8), cv2.DIST_L2, 3)
    # the shadow: neutral pixels within the reach, dark (or cut already: a soft shadow's fade) and beside a dark one
    # (the face's blurred rim against the lit paper is no shadow), reached from the paper across its blurred rim
    neutral = part_mask & (tint < 0.5) & (depth <= reach_px + 2.0)
    dark = neutral & (level < TINT_CUT_DARK)
    beside = cv2.dilate(dark.astype(np.uint8), kernel, iterations=_TINT_BESIDE_PX).astype(bool)
    # beside the shadow's core: pixels both neutral and dark, as no blend of the face with the lit paper is
    core = neutral & (tint < _TINT_CORE_TINT) & (level < _TINT_CORE_LEVEL)
    near_core = cv2.dilate(core.astype(np.uint8), kernel, iterations=_TINT_RIM_PX).astype(bool)
    linked = neutral & (dark | (cut.cut & beside) | near_core)
    near_paper = cv2.dilate((~filled).astype(np.uint8), kernel, iterations=_TINT_RIM_PX).astype(bool)
    _, lab = cv2.connectedComponents(linked.astype(np.uint8), connectivity=8)
    hit = np.unique(lab[linked & near_paper])
    new = np.isin(lab, hit[hit > 0])
    shadow = new & (level < TINT_CUT_DARK)
    if np.count_nonzero(shadow) < 50:
        return None
    face_level = float(np.median(level[interior]))
    shadow_level = float(np.median(level[shadow]))
    level_step = (face_level - shadow_level) / _noise(level[interior], level[shadow])
    tint_step = (face_yellow - float(np.median(yellow[shadow]))) / _noise(yellow[interior], yellow[shadow])
    if (
        level_step > TINT_CUT_LEVEL_STEP
        or tint_step < TINT_CUT_MIN_CONTRAST
        or float(np.median(tint[shadow])) > TINT_CUT_MAX_SHADOW
    ):
        return None
    new |= cut.cut & part_mask & (depth > reach_px + 2.0)
    keep = part_mask & ~new
    # the shadow's blurred rim beyond the outline, beside the cut: neutral and darker than half the paper (left dark, it
    # would stay a strip of the region around the painted cut)
    near_new = cv2.dilate(new.astype(np.uint8), kernel, iterations=_TINT_RIM_PX).astype(bool)
    fringe = ~part_mask & near_new & (tint < 0.5) & (level < 0.5)
    return ShadowCut(
        cut=new | (cut.cut & ~part_mask) | fringe,
        cut_px=int(np.count_nonzero(new)),
        edge_px=_edge_px(new, keep),
        texture_face=cut.texture_face,
        texture_shadow=cut.texture_shadow,
        level_face=face_level,
        level_shadow=shadow_level,
        direction=cut.direction,
        length_px=cut.length_px,
    )
