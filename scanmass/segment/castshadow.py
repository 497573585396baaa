"""Cast shadows cut from parts in photos: the pixels of a found region that are darkened paper.

A cast shadow is paper in less light: it keeps the paper's colour (each linear channel the
paper white's times one factor) and its texture (the paper's grain, and in a dim shadow the
camera's noise, which is large against its low level). A part's top face is a surface of its
own: smooth at the scale of a few pixels. Where a region found as a part holds its shadow
(:func:`scanmass.segment.shadow.shadow_risk` flags the edge band), :func:`shadow_cut` finds the
shadow-like pixels (rough, paper-coloured, darkened, reached from the region's boundary: the
paper outside or a hole) and then the shadow as a whole: a prism's shadow from a distant light
is its top face swept by one vector across the paper, so the region is the face swept by it,
and the layer the sweep adds is the shadow. The vector's direction is the one whose sweep adds
shadow-like layers the longest; its length is where the layers' level (or roughness) steps from
the shadow's to the face's; a search of nearby whole-pixel vectors by pixel votes refines both.
The cut is refused where the face cannot be told from the shadow (as rough, no step), where the
sweep would run through the face, or where it is longer than the part's shadow can be: a light 30
degrees up or higher, or a lower one (a window, down to 15 degrees) where the photo's own shadow
measures it, its grain running without a break from the outline to the step.

A sweep taken as a low light's (longer than a light 30 degrees up casts) must show one: a low, wide
light's shadow fades on past the outline, so the paper just beyond it is no brighter on the sweep's
side than on the other (:func:`_lit_beyond`). Along the photo's shadow direction (:func:`core_cut`),
the layers beyond the level step that are as grainy as the shadow at the face's level are a soft
shadow's core, lit by the room alone (:func:`_grainy_core`). Along a given direction, the soft shadow's
fade next to the outline (brighter than the face) is passed over: the step to the face lies past the core.
Where a photo shows no cut to give that direction, a sweep refused on its texture alone (the face almost as
grainy as its shadow) still shows it (:func:`sweep_direction`). Along the light past the fade, a core far darker than
the face (a quarter of its level or less) is told from it by its level, where it is twice as rough; a face of a
colour of its own (brass) beside a cut of the paper's colour, by that colour, where the cut is three times as rough.

The roughness is the smoothed absolute deviation from a 3x3 median, taken relative to the local
level: a median filter keeps a step edge, so the step between the face and the shadow adds
little, while noise and grain stand out (common practice: median filters keep edges and remove
impulse noise). On a dark face 8-bit coding is rough by itself; one code step at the face's
level is the floor below which nothing is taken as grain. JPEG coding also rings beside a bright
edge, a few pixels into a face at a few hundredths of the paper's level; where the roughness'
half-way lies no rougher than the side facing the light is as deep in, the shadow's level next to
the outline places the cut instead (:func:`_ringing_bound`). Where the face's level read beyond
the shadow's grain is a brighter sector than the one beside the shadow (brushed metal), and the
sweep so read is longer than the part's shadow can be, the step to the face beside the shadow is
read instead.

On a dark tinted face (black plastic: :func:`dark_tinted_face`) JPEG ringing near the outline is
as rough as a shadow's grain; there pixels at the face's level and colour are never shadow, the
sweep is chosen by votes over all directions (:func:`_dark_sweep`), and the dark walls and
bottoms of its through-holes are found to be opened (:func:`hole_bottoms`).

The pipeline paints the cut pixels with the paper's level and measures the image again, so the
outline lands on the step between the face and the shadow; where nothing is cut, the warning
and the term of :mod:`scanmass.segment.shadow`'s check stay.
"""

from __future__ import annotations

import math
from collections.abc import Iterator
from dataclasses import dataclass, replace

import cv2
import numpy as np

__all__ = [
    "ShadowCut",
    "roughness",
    "shadow_cut",
    "STRETCH_PX",
    "CUT_MIN_TEXTURE_RATIO",
    "dark_tinted_face",
    "hole_bottoms",
    "fade_cut",
    "core_cut",
    "sweep_direction",
    "lit_beyond",
]

#: How much longer than the 30-degree reach (:data:`~scanmass.segment.shadow.SHADOW_MIN_ELEVATION_DEG`) a
#: sweep may be where the photo's own shadow measures a lower light: tan(30 deg) / tan(15 deg) = 2.15, a
#: light down to 15 degrees above the mat (a window's middle; trigonometry). Such a sweep is taken only where
#: its layers are shadow-like without a break from the outline up to the step (:func:`_sweep_depth`'s run).
LOW_LIGHT_REACH_FACTOR = math.tan(math.radians(30.0)) / math.tan(math.radians(15.0))
#: Smallest ratio of the shadow's roughness (median over the candidate layer) to the face's
#: (median over its interior) for a cut: below it the two cannot be told apart.
CUT_MIN_TEXTURE_RATIO = 4.0
#: Largest share of a part's pixels a cut may remove (more: not a shadow beside a part).
CUT_MAX_SHARE = 0.5
#: Largest share of face-like pixels in a cut (more: the sweep runs through the face).
CUT_MAX_FACE_SHARE = 0.3
#: Side (px) of the grid cells that group a region's boundary into stretches for
#: :func:`scanmass.segment.hiddenshadow.hidden_shadow`: each stretch holds about this much of the
#: outline; also the fewest pixels a cut or a sweep's votes count for.
STRETCH_PX = 8
#: Channel tolerance of the paper's colour for a (smoothed) shadow pixel, relative.
_CHROMA_TOL = 0.2
#: Darkening factor (level / paper) above which a pixel is not taken as shadow.
_MAX_DEPTH = 0.85


@dataclass(frozen=True)
class ShadowCut:
    """The shadow layer found inside one region (:func:`shadow_cut`).

    Attributes
    ----------
    cut : (H, W) bool ndarray
        The region's pixels taken as cast shadow (crop coordinates).
    cut_px : int
        Their count.
    edge_px : float
        Length (px) of the boundary between the cut and what is kept: the stretch where
        the outline now runs on the step between the face and the shadow.
    texture_face, texture_shadow : float
        Roughness of the face (median over its interior) and of the cut (median).
    level_face, level_shadow : float
        Median darkening factor (level / paper white) of the face and of the cut.
    direction : (float, float) or None
        The unit vector (x, y px) of the sweep that added the cut layer; None for a cut that
        was not found by a sweep (:func:`fade_cut`).
    length_px : float or None
        The sweep's length (px); None where ``direction`` is.
    """

    cut: np.ndarray
    cut_px: int
    edge_px: float
    texture_face: float
    texture_shadow: float
    level_face: float
    level_shadow: float
    direction: tuple[float, float] | None = None
    length_px: float | None = None


def roughness(level: np.ndarray, sigma_px: float = 1.5) -> np.ndarray:
    """Local roughness of a level map: smoothed |level - 3x3 median| over the smoothed level.

    Examples
    --------
    A flat face beside noisy paper: rough only where the noise is.

    >>> rng = np.random.default_rng(1)
    >>> g = np.full((40, 40), 0.05, np.float32); g[:, 20:] = 0.03 + 0.02 * rng.random((40, 20))
    >>> r = roughness(g)
    >>> bool(r[:, :15].max() < 0.01), bool(np.median(r[:, 25:]) > 0.05)
    (True, True)
    """
    g = level.astype(np.float32)
    med = cv2.medianBlur(g, 3)
    dev = cv2.GaussianBlur(np.abs(g - med), (0, 0), sigma_px)
    base = cv2.GaussianBlur(med, (0, 0), sigma_px)
    return dev / np.maximum(base, 1e-3)


def shadow_cut(
    colour_lin: np.ndarray,
    part_mask: np.ndarray,
    paper_rgb: np.ndarray,
    reach_px: float,
    code_step: np.ndarray | None = None,
    direction: np.ndarray | None = None,
    past_fade: bool = False,
) -> ShadowCut | None:
    """The cast shadow inside a found region: rough, paper-coloured, reached from its boundary.

    Parameters
    ----------
    colour_lin : (H, W, 3) float ndarray
        A crop of the photo in linear light.
    part_mask : (H, W) bool ndarray
        The found region (holes cleared), with paper all around it.
    paper_rgb : (3,) ndarray
        The local paper white (linear), e.g. :attr:`~scanmass.segment.shadow.ShadowRisk.paper_rgb`.
    reach_px : float
        How far (px) inside the region a shadow can reach
        (:func:`~scanmass.segment.shadow.shadow_band_px`).
    code_step : (H, W) float ndarray, optional
        Per pixel, the step of linear light (as a share of the paper white) between its
        encoded value and the next: the grain of 8-bit coding, which at a dark face's level
        is rough by itself. A pixel is taken as shadow-like only when its roughness is above
        that of one code step at the face's level.
    direction : (2,) ndarray, optional
        The sweep's direction (x, y px, as :attr:`ShadowCut.direction` gives it) when another
        part of the same photo showed it: one light casts every shadow of a photo the same way.
        The sweep is then sought along it only (its length, refinement and refusals as
        without it); the dark face's own search is skipped.
    past_fade : bool, optional
        With ``direction``: the layers next to the outline brighter than the face (a soft
        shadow's fade, found as part) are passed over, and the step to the face is read past
        the darker core beyond them (a region taken as a face beside its shadow although it
        fades as a shadow alone does: :func:`scanmass.segment.shadow.too_wide_for_shadow`).

    Returns
    -------
    ShadowCut or None
        None when no shadow layer is found or it cannot be told from the face: the face as
        rough as the shadow (less than :data:`CUT_MIN_TEXTURE_RATIO` apart), a sweep longer
        than ``reach_px`` or holding more than :data:`CUT_MAX_FACE_SHARE` face-like pixels,
        too little face left, or a cut of more than :data:`CUT_MAX_SHARE` of the region.

    Examples
    --------
    A smooth dark face (0.04 of the paper) 58 px wide with a rough shadow layer 8 px wide
    along its left side, found as one region: the layer is cut, the face kept (but for the
    two pixels at each end of the cut that touch both the cut and the outline: a rim left
    between a cut and the paper goes with the cut).

    >>> rng = np.random.default_rng(0)
    >>> paper = np.array([0.7, 0.72, 0.74])
    >>> img = np.tile(paper, (100, 100, 1)); mask = np.zeros((100, 100), bool); mask[20:80, 14:80] = True
    >>> img[20:80, 22:80] = 0.04 * paper
    >>> img[20:80, 14:22] = paper * (0.01 + 0.03 * rng.random((60, 8, 1)))
    >>> cut = shadow_cut(img, mask, paper, reach_px=10)
    >>> bool(cut.cut[:, 14:22][mask[:, 14:22]].all()), bool(cut.cut[:, 23:].any()), cut.edge_px
    (True, False, 60.0)
    >>> [(int(r), int(c)) for r, c in zip(*np.nonzero(cut.cut[:, 22:23]))]
    [(20, 0), (21, 0), (78, 0), (79, 0)]
    """
    if direction is not None:
        return _shadow_cut(
            colour_lin,
            part_mask,
            paper_rgb,
            reach_px,
            code_step,
            use_dark=False,
            direction=direction,
            past_fade=past_fade,
        )[0]
    cut, dark = _shadow_cut(colour_lin, part_mask, paper_rgb, reach_px, code_step, use_dark=True)
    if cut is not None or not dark:
        return cut
    # refused with the dark face's votes: the general sweep, on every rough pixel
    return _shadow_cut(colour_lin, part_mask, paper_rgb, reach_px, code_step, use_dark=False)[0]


def _shadow_cut(
    colour_lin: np.ndarray,
    part_mask: np.ndarray,
    paper_rgb: np.ndarray,
    reach_px: float,
    code_step: np.ndarray | None,
    use_dark: bool,
    direction: np.ndarray | None = None,
    witness_px: float | None = None,
    min_texture_ratio: float = CUT_MIN_TEXTURE_RATIO,
    past_fade: bool = False,
) -> tuple[ShadowCut | None, bool]:
    """:func:`shadow_cut`, with the dark face's sweep (:func:`_dark_sweep`) where ``use_dark`` and the face is dark; and whether it was."""
    mask8 = part_mask.astype(np.uint8)
    if mask8.sum() < 50:
        return None, False
    paper = np.asarray(paper_rgb, np.float32)
    q = colour_lin.astype(np.float32) / paper
    level = q.mean(axis=2)
    rough = roughness(level)
    smooth = cv2.GaussianBlur(q, (0, 0), 1.5)
    sm = smooth.mean(axis=2)
    neutral = np.all(np.abs(smooth - sm[..., None]) <= _CHROMA_TOL * sm[..., None] + 0.01, axis=2)
    inside = cv2.distanceTransform(mask8, cv2.DIST_L2, 3)
    # the face: deeper than a shadow reaches, or (a narrow part) the deepest quarter of the region
    interior = inside > min(reach_px + 2.0, 0.75 * float(inside.max()))
    if np.count_nonzero(interior) < 50:
        return None, False
    tex_face = float(np.median(rough[interior]))
    grain = max(tex_face, 1e-4)  # the face's grain, the unit of the texture ratios below
    face_level = float(np.median(level[interior]))
    floor = 0.01
    if code_step is not None:
        floor = max(floor, 0.5 * float(np.median(code_step[interior])) / max(face_level, 1e-6))
    # a pixel is shadow-like when far rougher than the face, paper-coloured and darkened,
    # and reached from the region's boundary through such pixels
    like = part_mask & (rough > max(2.0 * tex_face, floor)) & neutral & (sm < _MAX_DEPTH) & (inside <= reach_px)
    dark = use_dark and _is_dark(smooth, interior)
    # along a given direction the layers are the outer ring's (holes filled): the strip a sweep
    # adds along a hole's edge is face, not shadow beside the part
    outer = _filled(part_mask) if direction is not None else part_mask
    alike = _dark_face_alike(smooth, interior) if dark else np.zeros(level.shape, bool)
    # a matte face tinted as a plastic's: its pixels (its level and colour) are no shadow, however
    # rough JPEG ringing makes them beside a bright edge (a dark tinted face's have their own rules)
    tinted = _tinted_face_alike(smooth, interior)
    if not _is_dark(smooth, interior):
        like &= ~tinted
    like = _reached(like, part_mask, inside)
    # on a dark tinted face, the pixels at the face's level and colour are no shadow, however rough
    dark_like = _reached(like & ~alike, part_mask, inside)
    sweep = _dark_sweep(part_mask, dark_like, level, rough, reach_px, alike, inside) if dark else None
    if sweep is None or sweep[1] > reach_px + 1.0:
        # no sweep by the dark face's votes: the general one (on the layers' shares and profile)
        sweep = _sweep_depth(
            outer if direction is not None else part_mask,
            like,
            level,
            np.where(tinted, 0.0, rough),
            reach_px,
            direction,
            witness_px,
            past_fade,
        )
    if sweep is None:
        return None, dark
    unit, depth_px, face_like, run_px, rim, bounded = sweep
    if depth_px > reach_px + 1.0 and not (
        depth_px <= LOW_LIGHT_REACH_FACTOR * reach_px + 1.0 and depth_px <= run_px + 1.0
    ):
        # longer than a shadow of the part can be under a light 30 degrees up or higher, and not
        # measured as a lower light's shadow (shadow-like layers without a break up to the step): not its shadow
        return None, dark
    if depth_px > reach_px + 1.0 and _lit_beyond(part_mask, unit, level):
        # taken as a lower light's shadow, but the paper just past the outline is brighter on the sweep's side
        # than on the other: no low light's shadow, which fades on past the outline on its own side
        return None, dark
    # a sweep bounded below the coding's ringing (:func:`_ringing_bound`) is the outer ring's too: a hole's
    # rim rings as the outline does, beside the hole's bright floor
    swept = outer if direction is not None else (_filled(part_mask) if bounded else part_mask)
    cut = _sweep_layer(swept.astype(np.uint8), depth_px * unit) & part_mask
    if direction is not None:
        # a tinted face (steel in window light): its pixels are no shadow (the shadow keeps the paper's tint)
        tint = _tint(smooth, sm)
        face_tint = float(np.median(tint[interior]))
        if abs(face_tint) >= _DARK_CHROMA_STEP:
            cut &= ~(np.abs(tint - face_tint) < np.abs(tint))
        # the length was read from the layers up to _FACE_WINDOW_PX beyond it: they must lie on the
        # face, not across a hole (a ring narrower than that reads the hole's paper as its face)
        beyond = _sweep_layer(outer.astype(np.uint8), (depth_px + _FACE_WINDOW_PX) * unit) & ~cut
        if np.count_nonzero(beyond & ~part_mask) > _FACE_WINDOW_HOLE_SHARE * np.count_nonzero(beyond):
            return None, dark
    if np.count_nonzero(cut & face_like) > CUT_MAX_FACE_SHARE * np.count_nonzero(cut):
        return None, dark  # the sweep runs through the face: not a shadow beside it
    settled = _settled_cut(cut, part_mask)
    if settled is None:
        return None, dark
    cut, keep = settled
    if tinted.any():
        cut = _face_given_back(cut, part_mask, level, face_level)
        keep = part_mask & ~cut
    # the shadow's grain, past the blurred rim where the sweep's run began beyond it
    graded = cut & ~rim if rim is not None and np.count_nonzero(cut & ~rim) >= 50 else cut
    tex_shadow = float(np.median(rough[graded]))
    if past_fade and direction is not None and tex_shadow < min_texture_ratio * grain:
        # past the fade along the light: a core far darker than the face is told from it by its level
        core = graded & (level < face_level)
        if (
            np.count_nonzero(core) >= 50
            and float(np.median(level[core])) <= _DARK_CORE_SHARE * face_level
            and float(np.median(rough[core])) >= _DARK_CORE_TEXTURE_RATIO * grain
        ):
            tex_shadow = float(np.median(rough[core]))
            min_texture_ratio = _DARK_CORE_TEXTURE_RATIO
    if direction is None and tex_shadow < min_texture_ratio * grain:
        # a face of a colour of its own (brass) beside a cut of the paper's: told apart by the colour
        tint = _tint(smooth, sm)
        face_tint = float(np.median(tint[interior]))
        if (
            abs(face_tint) >= _COLOUR_FACE_TINT
            and abs(float(np.median(tint[graded]))) <= _COLOUR_CUT_SHARE * abs(face_tint)
            and tex_shadow >= _COLOUR_TEXTURE_RATIO * grain
        ):
            min_texture_ratio = _COLOUR_TEXTURE_RATIO
    if tex_shadow < min_texture_ratio * grain:
        return None, dark
    # a strip of the outline's rim left between the cut and the paper (the shadow's far edge,
    # a whole-pixel sweep short of it) would enclose the cut as a false hole: it goes with the
    # cut, unless that parts the face (the small pieces are gone already)
    cut = _with_rim(cut, part_mask)
    keep = part_mask & ~cut
    n_cut = int(np.count_nonzero(cut))
    k4 = np.array([[0, 1, 0], [1, 1, 1], [0, 1, 0]], np.uint8)
    border = keep & cv2.dilate(cut.astype(np.uint8), k4).astype(bool)
    if not dark:
        # a dark face's shadow fades on past the outline: painted as paper with the cut
        cut = cut | _fade_beyond(cut, part_mask, smooth, interior, depth_px * unit)
    found = ShadowCut(
        cut=cut,
        cut_px=n_cut,
        edge_px=float(np.count_nonzero(border)),
        texture_face=tex_face,
        texture_shadow=tex_shadow,
        level_face=float(np.median(level[keep])),
        level_shadow=float(np.median(level[cut])),
        direction=(float(unit[0]), float(unit[1])),
        length_px=float(depth_px),
    )
    return found, dark


#: Smallest tint (:func:`_tint`, median over the face) of a face of a colour of its own, for its cut to be told
#: from it by colour as well as grain (a shadow is the paper in less light: it keeps the paper's colour). On the
#: committed render tests/data/reallight/dev-window-steel5-t14 the brass collar's face reads 0.99, its own sweep's
#: cut 0.07, 3.9 times as rough (a cut needed 4; +18.2 % in area kept); brushed steel in window light reads
#: -0.06 to -0.10 (:func:`fade_cut`), under this.
_COLOUR_FACE_TINT = 0.3
#: Largest tint of such a cut (median), as a share of the face's: the paper's colour (0), not the face's.
_COLOUR_CUT_SHARE = 0.25
#: Smallest ratio of the cut's roughness to the face's for such a cut (against :data:`CUT_MIN_TEXTURE_RATIO`).
_COLOUR_TEXTURE_RATIO = 3.0
#: Largest median level of a cut's core (its pixels darker than the face), as a share of the face's, for a
#: sweep along the light past the fade (:func:`shadow_cut`'s ``past_fade``) to be told from the face by its level.
#: On the committed render tests/data/reallight/dev-lens-window-steel2-t16 the 3 mm steel plate's core lies at
#: 0.015 of the paper white against its face's 0.11, 3.8 times as rough (a cut needed 4; +13.0 % in area kept).
_DARK_CORE_SHARE = 0.25
#: Smallest ratio of such a core's roughness to the face's for that cut (against :data:`CUT_MIN_TEXTURE_RATIO`).
_DARK_CORE_TEXTURE_RATIO = 2.0
#: Largest level (share of the paper white) of a face taken as dark (:func:`_dark_face_alike`).
DARK_FACE_LEVEL = 0.1


def _fade_beyond(
    cut: np.ndarray, part_mask: np.ndarray, smooth: np.ndarray, interior: np.ndarray, step: np.ndarray
) -> np.ndarray:
    """(H, W) bool: the soft shadow's fade just outside a metal region, beyond its cut along the sweep.

    Under a wide low light (a window) a thick part's shadow fades out over many pixels; the
    region found ends where the fade rises past the segmentation's threshold, but the fade goes
    on beyond it. With the cut painted as paper the level around that fade rises, and its next
    pixels read as a dark piece of their own, which is merged back into the part as a fragment of
    its grainy face (on the committed render tests/data/reallight/dev-window-low-steel-t15 the
    steel disc's cut of 13 px left a ring 8-10 px wide beyond it: +12 % in area). Pixels outside
    the region that the cut swept on by the sweep's own vector reaches, with the paper's tint, at
    :data:`_FADE_LEVEL_RATIO` or more of the face's level (a dark face beside it is no fade) and
    under :data:`_MAX_DEPTH` of the paper (and under the paper's level 4-16 px off the outline, which
    the caller paints with), reached from the cut, are that fade, where the paper 4-16 px beyond the
    cut along the sweep is still under :data:`_FADE_DIM` of the paper white (a soft shadow; beside a
    hard one, a spot's, the paper there is lit and nothing is added): they are painted
    as paper with the cut (a shadow is paper in less light; they were never part of the region).
    Only beside a dark face (under :data:`DARK_FACE_LEVEL`), whatever its tint: a thick steel face half
    in the fade reads too faintly tinted for :func:`fade_cut` (the same render's bracket, -0.049 of its
    level against the 0.05 step). Not after a dark plastic face's own sweep (:func:`_dark_sweep`), whose
    cut's edge is blended by the caller; after the general sweep that follows its refusal, as on any
    dark face (tests/data/reallight/dev-mixed-black2-t22's black plate 6.5 mm: -4.19 % -> -3.82 %, no
    thickness given).

    ``smooth`` is the crop's colour over the paper white (per channel), smoothed; ``interior`` the
    face's pixels; ``step`` the sweep's vector (x, y px).
    """
    none = np.zeros(part_mask.shape, bool)
    sm = smooth.mean(axis=2)
    tint = _tint(smooth, sm)
    face_level = float(np.median(sm[interior]))
    face_tint = float(np.median(tint[interior]))
    if not 0 < face_level < DARK_FACE_LEVEL:
        return none
    kernel, anchor = _line_kernel(-np.asarray(step, float))
    zone = cv2.dilate(cut.astype(np.uint8), kernel, anchor=anchor).astype(bool) & ~part_mask
    # the caller paints with the paper's level 4-16 px off the outline, in a long fade itself dimmed:
    # a pixel brighter than that is left as it is (painted, it would darken)
    outside = cv2.distanceTransform((~part_mask).astype(np.uint8), cv2.DIST_L2, 3)
    ring = (outside > 4) & (outside < 16)
    if np.count_nonzero(ring) < 20:
        return none
    paint = min(_MAX_DEPTH, float(np.median(sm[ring])))
    # a soft shadow (a window's) still dims the paper 4-16 px beyond the outline on its side; a hard
    # one's paper there is lit (a spot's: nothing beyond to paint)
    far = zone & ring
    if np.count_nonzero(far) < 20 or float(np.median(sm[far])) >= _FADE_DIM:
        return none
    fade = zone & (sm >= _FADE_LEVEL_RATIO * face_level) & (sm < paint) & (np.abs(tint - face_tint) > np.abs(tint))
    if not fade.any():
        return none
    count, labels = cv2.connectedComponents(fade.astype(np.uint8), connectivity=8)
    near = cv2.dilate(cut.astype(np.uint8), np.ones((3, 3), np.uint8)).astype(bool)
    touching = np.unique(labels[near & fade])
    return np.isin(labels, touching[touching > 0])


#: Smallest chroma difference (blue minus red over the level, smoothed) between a dark face and
#: the paper for :func:`_dark_face_alike` to use it.
_DARK_CHROMA_STEP = 0.05
#: Largest tint of a dark face taken by :func:`_is_dark` (beyond it: a metal's own colour).
_DARK_TINT_MAX = 0.5


def _tint(smooth: np.ndarray, level: np.ndarray) -> np.ndarray:
    """Blue minus red over the level, per pixel, of colours taken over the paper white (the paper's 0)."""
    return np.asarray((smooth[..., 2] - smooth[..., 0]) / np.maximum(level, 1e-6))


def _reached(like: np.ndarray, part_mask: np.ndarray, inside: np.ndarray) -> np.ndarray:
    """The pieces of ``like`` reached from the region's boundary (a pixel within 1.5 px of it)."""
    count, labels = cv2.connectedComponents(like.astype(np.uint8), connectivity=8)
    touching = np.unique(labels[part_mask & (inside <= 1.5) & like])
    return np.isin(labels, touching[touching > 0])


def _dark_face_alike(smooth: np.ndarray, interior: np.ndarray) -> np.ndarray:
    """(H, W) bool: pixels as a dark face looks (level and colour), whatever their grain.

    On a dark face (level under :data:`DARK_FACE_LEVEL` of the paper) a JPEG file's ringing
    near the outline is as rough as a shadow's grain: one 8-bit code is several per cent of
    the face's level, and the blocks that hold the edge ripple by a few codes. What the
    ringing keeps is the face's level and colour, smoothed over a few pixels; a cast shadow is
    the paper in less light, at another level (on the committed spotlight render
    tests/data/reallight/spot-black-t20 the black bracket's face is 0.031 of the paper, its
    shadow 0.015) or, where the level is the same, at the paper's colour (that face is 13 %
    redder than the paper against blue, its shadow 4 %). A pixel within
    :data:`_LEVEL_STEP_RATIO` of the face's level and nearer the face's colour than the
    paper's (when the two differ by :data:`_DARK_CHROMA_STEP`) is face-alike. All False on a
    face brighter than that.

    ``smooth`` is the crop's colour over the paper white (per channel), smoothed; ``interior``
    the face's pixels.
    """
    sm = smooth.mean(axis=2)
    face_level = float(np.median(sm[interior]))
    if face_level >= DARK_FACE_LEVEL or face_level <= 0:
        return np.zeros(sm.shape, bool)
    ratio = np.maximum(sm, face_level) / np.maximum(np.minimum(sm, face_level), 1e-6)
    alike = ratio < _LEVEL_STEP_RATIO
    tint = _tint(smooth, sm)
    face_tint = float(np.median(tint[interior]))
    if abs(face_tint) >= _DARK_CHROMA_STEP:
        # the paper's tint is 0 (the colour is taken over its white): nearer the face's
        alike &= np.abs(tint - face_tint) < np.abs(tint)
    return alike


#: Smallest level of a fade pixel, as a multiple of the face's (:func:`fade_cut`).
_FADE_LEVEL_RATIO = 3.0
#: Largest level of the paper just outside the outline (1.5-5 px off it, smoothed over 4 px),
#: as a share of the paper's further off (12-20 px), for a stretch to lie in a fading shadow
#: (:func:`fade_cut`).
_FADE_DIM = 0.8


def fade_cut(colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray, reach_px: float) -> ShadowCut | None:
    """The inner end of a soft shadow's fade inside the outline of a dark tinted metal face.

    A metal face under a low side light (brushed steel in window light: 0.02-0.06 of the
    paper, tinted -0.06 to -0.10 blue minus red over its level) is as grainy as the shadow
    beside it, so :func:`shadow_cut` refuses; but the soft shadow's inner end is no face: it
    rises from several times the face's level outwards to the paper, with the paper's tint
    (0), and the paper beyond it is still dimmed (a soft shadow fades over many px; on the lit
    side the paper just off the outline is as bright as further off). So the pixels of the
    region within ``reach_px`` of its boundary, reached from it, at :data:`_FADE_LEVEL_RATIO` or
    more of the face's level (under :data:`_MAX_DEPTH` of the paper) and nearer the paper's tint
    than the face's, are cut where the paper just outside the boundary near them is under
    :data:`_FADE_DIM` of the paper further off. The outline's own blur (one or two such pixels
    all round) is left where the paper beside it is lit, so the outline stays on the face's
    step there as it then lands on it in the shadow. On the committed render
    tests/data/reallight/window-steel-t25 the steel gasket's shadow side (and the far side of
    its hole, in the wall's shadow) holds 1-3 such pixels (0.15-0.3 of the paper) inside its
    outline, the paper beyond at 0.45-0.8. The cut also holds the pixels just outside the
    boundary beside it (within 3 px), so that painted as paper the shadow side reads as paper
    up to the face (``cut_px`` counts only the region's pixels).

    Returns None on a face that is not dark (under :data:`DARK_FACE_LEVEL`) and tinted (at
    least :data:`_DARK_CHROMA_STEP` from the paper), or where no band is deep enough.

    Examples
    --------
    A dark steel-tinted face 44 px wide with a 2 px shadow fade along its right side inside the
    outline, fading on over 10 px of paper beyond it, and a 1 px blur ring elsewhere beside lit
    paper: the fade inside is cut, the ring kept.

    >>> paper = np.array([0.7, 0.72, 0.74]); img = np.tile(paper, (80, 96, 1))
    >>> mask = np.zeros((80, 96), bool); mask[15:65, 15:62] = True
    >>> img[16:64, 16:60] = 0.03 * paper * np.array([1.04, 1.0, 0.96])
    >>> img[15:65, 60:72] = paper * np.linspace(0.2, 0.9, 12)[None, :, None]
    >>> img[15, 16:60] = img[64, 16:60] = img[16:64, 15] = 0.5 * paper
    >>> cut = fade_cut(img, mask, paper, 10.0)
    >>> bool(cut.cut[20:60, 60:62].all()), bool((cut.cut & mask)[:, :59].any()), bool(cut.cut[20:60, 62:65].all())
    (True, False, True)
    """
    mask8 = part_mask.astype(np.uint8)
    if mask8.sum() < 50:
        return None
    q = (colour_lin / np.asarray(paper_rgb)).astype(np.float32)
    smooth = cv2.GaussianBlur(q, (0, 0), 1.0)
    sm = smooth.mean(axis=2)
    inside = cv2.distanceTransform(mask8, cv2.DIST_L2, 3)
    interior = inside > min(reach_px + 2.0, 0.75 * float(inside.max()))
    if np.count_nonzero(interior) < 50:
        return None
    face_level = float(np.median(sm[interior]))
    tint = _tint(smooth, sm)
    face_tint = float(np.median(tint[interior]))
    if not 0 < face_level < DARK_FACE_LEVEL or abs(face_tint) < _DARK_CHROMA_STEP:
        return None
    fade = (
        part_mask
        & (inside <= reach_px)
        & (sm >= _FADE_LEVEL_RATIO * face_level)
        & (sm < _MAX_DEPTH)
        & (np.abs(tint - face_tint) > np.abs(tint))
    )
    fade = _reached(fade, part_mask, inside)
    # the paper just off the boundary (outside it, or in a hole) against the paper further off
    level = q.mean(axis=2)
    outside = cv2.distanceTransform((1 - mask8).astype(np.uint8), cv2.DIST_L2, 3)
    far = level[(outside > 12) & (outside <= 20)]
    if far.size < 50:
        return None
    ring = ((outside > 1.5) & (outside <= 5)).astype(np.float32)
    near = cv2.GaussianBlur(level * ring, (0, 0), 4) / np.maximum(cv2.GaussianBlur(ring, (0, 0), 4), 1e-6)
    cut = _with_rim(fade & (near < _FADE_DIM * float(np.median(far))), part_mask)
    n_cut = int(np.count_nonzero(cut))
    keep = part_mask & ~cut
    if n_cut < STRETCH_PX or np.count_nonzero(keep) < 50:
        return None
    k4 = np.array([[0, 1, 0], [1, 1, 1], [0, 1, 0]], np.uint8)
    border = keep & cv2.dilate(cut.astype(np.uint8), k4).astype(bool)
    rough = roughness(level)
    # the rest of the fade just outside (3 px) goes with it: painted as paper, a strip of the
    # cut between the face and the darker fade outside would read as a hole
    beyond = ~part_mask & (outside <= 3.0) & cv2.dilate(cut.astype(np.uint8), np.ones((7, 7), np.uint8)).astype(bool)
    return ShadowCut(
        cut=cut | beyond,
        cut_px=n_cut,
        edge_px=float(np.count_nonzero(border)),
        texture_face=float(np.median(rough[interior])),
        texture_shadow=float(np.median(rough[cut])),
        level_face=float(np.median(sm[keep])),
        level_shadow=float(np.median(sm[cut])),
    )


#: Largest level of a shadow's core beyond the fade, as a share of the face's, for :func:`core_cut`.
_CORE_LEVEL_RATIO = 0.9


def sweep_direction(
    colour_lin: np.ndarray,
    part_mask: np.ndarray,
    paper_rgb: np.ndarray,
    reach_px: float,
    code_step: np.ndarray | None = None,
) -> tuple[float, float] | None:
    """The direction (unit x, y px) of a region's own sweep that :func:`shadow_cut` refused on texture alone; else None.

    A metal face almost as grainy as its shadow (a brass collar in window light: the shadow 3.6 times
    as rough as the face, under :data:`CUT_MIN_TEXTURE_RATIO`) is no ground for the cut's length, but
    every other test of the sweep passed: its run of shadow-like layers from the outline, within the
    reach, not through the face, with face left. Its direction is then evidence of the photo's light
    (one light casts every shadow of a photo the same way) for a part whose own search finds none
    (:func:`core_cut`'s ``direction``). For a region :func:`shadow_cut` refused; None where a test
    other than the texture refuses its general sweep too.
    """
    found = _shadow_cut(colour_lin, part_mask, paper_rgb, reach_px, code_step, use_dark=False, min_texture_ratio=0.0)[0]
    return None if found is None else found.direction


def core_cut(
    colour_lin: np.ndarray,
    part_mask: np.ndarray,
    paper_rgb: np.ndarray,
    reach_px: float,
    direction: np.ndarray,
    code_step: np.ndarray | None = None,
    witness_px: float | None = None,
    past_fade: bool = False,
) -> ShadowCut | None:
    """A soft shadow's fade and its core, swept along the photo's shadow direction, inside a metal part.

    Where :func:`shadow_cut`'s own search is refused on a metal face as grainy as its shadow,
    :func:`fade_cut` takes the shadow's inner end that is brighter than the face. Under a low,
    wide light (a window) a thick part's shadow also has a core lit by the room alone, darker
    than the face and as rough as the shadow, which the segmentation took as part and the fade
    test cannot take. Given the sweep's direction from another part of the same photo (one
    light casts every shadow of a photo the same way), the sweep along it (:func:`shadow_cut`
    with ``direction``) is joined to the fade, but only where what it adds beyond the fade is
    darker than the face (under :data:`_CORE_LEVEL_RATIO` of its level): a core, not the face's
    own rough rim (steel's edge at the face's level, which such a sweep would also take).
    None when no such core is found (the caller keeps the fade test's cut).

    Examples
    --------
    A steel-tinted face 50 px wide; on its right a shadow's core 14 px wide darker than the face
    and rough, found as part, then its fade (brighter, the paper's tint) out to the paper; the
    sweep along +x takes the core. A rough rim at the face's own level is no core.

    >>> rng = np.random.default_rng(3)
    >>> paper = np.array([0.7, 0.72, 0.74]); img = np.tile(paper, (80, 120, 1))
    >>> mask = np.zeros((80, 120), bool); mask[15:65, 15:79] = True
    >>> img[15:65, 15:65] = 0.04 * paper * np.array([1.05, 1.0, 0.95])
    >>> img[15:65, 65:79] = paper * (0.005 + 0.04 * rng.random((50, 14, 1)))
    >>> img[15:65, 79:95] = paper * np.linspace(0.3, 0.9, 16)[None, :, None]
    >>> cut = core_cut(img, mask, paper, 20.0, np.array([1.0, 0.0]))
    >>> bool(cut.cut[20:60, 66:79].all()), bool((cut.cut & mask)[:, :63].any()), cut.direction
    (True, False, (1.0, 0.0))
    >>> img[15:65, 65:79] = 0.04 * paper * (0.8 + 0.4 * rng.random((50, 14, 1)))  # a rough rim at the face's level
    >>> core_cut(img, mask, paper, 20.0, np.array([1.0, 0.0])) is None
    True
    """
    along = _shadow_cut(
        colour_lin,
        part_mask,
        paper_rgb,
        reach_px,
        code_step,
        use_dark=False,
        direction=direction,
        witness_px=witness_px,
        past_fade=past_fade,
    )[0]
    if along is None:
        return None
    fade = fade_cut(colour_lin, part_mask, paper_rgb, reach_px)
    keep = part_mask & ~along.cut
    if np.count_nonzero(keep) < 50:
        return None
    level = (colour_lin / np.asarray(paper_rgb)).mean(axis=2)
    face_level = float(np.median(level[keep]))
    core = _grainy_core(level, part_mask, along, face_level, reach_px, witness_px)
    if core is not None:
        along = replace(along, cut=along.cut | core, length_px=along.length_px)
        keep = part_mask & ~along.cut
        if np.count_nonzero(keep) < 50:
            return None
    # the fade's pixels: those fade_cut took, and (where it refused the face as too faintly
    # tinted, as a thick steel face half in the shadow's fade reads) those at _FADE_LEVEL_RATIO
    # of the face's level or more: neither face nor core
    faded = fade.cut if fade is not None else level >= _FADE_LEVEL_RATIO * face_level
    added = along.cut & part_mask & ~faded
    if np.count_nonzero(added) < STRETCH_PX:
        return None
    if core is None and float(np.median(level[added])) >= _CORE_LEVEL_RATIO * face_level:
        return None  # at the face's level: the face's rough rim, not a shadow's core
    if fade is None:
        return along
    cut = along.cut | fade.cut
    keep = part_mask & ~cut
    k4 = np.array([[0, 1, 0], [1, 1, 1], [0, 1, 0]], np.uint8)
    border = keep & cv2.dilate(cut.astype(np.uint8), k4).astype(bool)
    return replace(
        along, cut=cut, cut_px=int(np.count_nonzero(cut & part_mask)), edge_px=float(np.count_nonzero(border))
    )


def lit_beyond(colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray, cut: ShadowCut) -> bool:
    """Whether the paper just past a swept cut (1.5-5 px off the outline) is brighter than the paper off the rest of the outline.

    A low, wide light's soft shadow still dims the paper beyond the cut on its own side; a hard light's (a spot's)
    leaves it lit, and a region that fades as a shadow alone does and is cut along such a light's direction is a
    face whose dark sector was taken for shadow. On the committed renders (tests/data/reallight):
    dev-spot-steel3-t20's steel plate 3 mm under the spot, 0.91 of the paper white beyond its cut against 0.78
    off the rest (the cut -20 % of its face); dev-window-steel5-t14's 5.5 mm plate in window light, 0.59 against
    0.74. The zone beyond is the cut swept on by its own vector (:attr:`ShadowCut.direction`, ``length_px``);
    False for a cut without one.
    """
    if cut.direction is None or cut.length_px is None:
        return False
    level = cv2.GaussianBlur(
        (np.asarray(colour_lin, np.float32) / np.asarray(paper_rgb, np.float32)).mean(axis=2), (0, 0), 1.5
    )
    kernel, anchor = _line_kernel(-np.asarray(cut.direction, float) * cut.length_px)
    zone = cv2.dilate(cut.cut.astype(np.uint8), kernel, anchor=anchor).astype(bool) & ~part_mask
    outside = cv2.distanceTransform((~part_mask).astype(np.uint8), cv2.DIST_L2, 3)
    ring = (outside > 1.5) & (outside < 5)
    beyond, rest = zone & ring, ring & ~zone
    if np.count_nonzero(beyond) < STRETCH_PX or np.count_nonzero(rest) < STRETCH_PX:
        return False
    return bool(np.median(level[beyond]) > np.median(level[rest]))


def _lit_beyond(part_mask: np.ndarray, unit: np.ndarray, level: np.ndarray) -> bool:
    """Whether the paper just past the outline (2-4 px along ``unit``) is brighter on the sweep's side than on the other.

    A low, wide light's shadow fades on past the outline on its own side (the paper there is still
    dimmed; :func:`fade_cut`), so a sweep taken as such a shadow's (longer than a light 30 degrees up
    or higher casts) that has the brighter paper beyond it runs away from the light. On the committed
    renders (tests/data/reallight) the six such sweeps of the tuned set have the paper beyond them at
    0.49-0.95 of the paper white against 0.95-1.02 on the other side; dev-spot-brass5-t24's thin brass
    bracket under the spot (its face as dark as a shadow, its rim grainy with the coding's ringing)
    swept away from the spot: 0.95 against 0.88, the cut a strip of its face (-24.8 % in area).
    """
    mask8 = _filled(part_mask).astype(np.uint8)
    outside = cv2.distanceTransform(1 - mask8, cv2.DIST_L2, 3) >= 1.5
    h, w = mask8.shape
    sides = []
    for sign in (1.0, -1.0):
        moved = np.zeros(mask8.shape, bool)
        for s in (2.0, 3.0, 4.0):
            shift = np.array([[1.0, 0.0, sign * unit[0] * s], [0.0, 1.0, sign * unit[1] * s]], np.float32)
            moved |= cv2.warpAffine(mask8, shift, (w, h), flags=cv2.INTER_NEAREST).astype(bool)
        ring = moved & outside
        if np.count_nonzero(ring) < STRETCH_PX:
            return False
        sides.append(float(np.median(level[ring])))
    return sides[0] > sides[1]


#: Fewest layers of grain beyond a sweep's level step for :func:`_grainy_core` to take them as a shadow's core.
_CORE_MIN_LAYERS = 2
#: Largest median level of such a layer, as a share of the face's (no brighter sector of a brushed face).
_CORE_MAX_LEVEL = 1.3


def _grainy_core(
    level: np.ndarray,
    part_mask: np.ndarray,
    along: ShadowCut,
    face_level: float,
    reach_px: float,
    witness_px: float | None = None,
) -> np.ndarray | None:
    """The layers beyond a sweep's level step that are as grainy as the shadow: a soft shadow's core at the face's level.

    Under a wide, low light (a window) a thick metal part's shadow fades from the paper to a core
    lit by the room alone, as dark as the metal face; the sweep's level step (:func:`_read_step`)
    then lies at the fade's inner end, and the core stays in the part. The layers a sweep along the
    same direction adds next are taken while each is rough (median roughness at least half the
    sweep's cut's and :data:`CUT_MIN_TEXTURE_RATIO` times the face's) and no brighter than
    :data:`_CORE_MAX_LEVEL` times the face's level, up to ``reach_px`` and, where another part's sweep
    showed the direction, within :data:`_WITNESS_SLACK_PX` of its length (one thickness, one light: one
    shadow length; beyond it the grain is the face's own rough rim, as on the committed render
    tests/data/reallight/dev-window-low-steel-t15, whose 7 mm bracket lost 10 % to it). None unless at
    least :data:`_CORE_MIN_LAYERS` such layers follow the step.
    """
    if along.direction is None or along.length_px is None:
        return None
    rough = roughness(level)
    inside = cv2.distanceTransform(part_mask.astype(np.uint8), cv2.DIST_L2, 3)
    interior = (inside > min(reach_px + 2.0, 0.75 * float(inside.max()))) & ~along.cut
    cut = along.cut & part_mask
    if np.count_nonzero(interior) < 50 or np.count_nonzero(cut) < STRETCH_PX:
        return None
    grain = max(0.5 * float(np.median(rough[cut])), CUT_MIN_TEXTURE_RATIO * float(np.median(rough[interior])))
    unit = np.asarray(along.direction, float)
    outer = _filled(part_mask).astype(np.uint8)
    core = np.zeros(part_mask.shape, bool)
    layers = 0
    stop = reach_px if witness_px is None else min(reach_px, witness_px + _WITNESS_SLACK_PX)
    for k, new in _new_layers(outer, unit, int(stop) + 1):
        if k <= along.length_px:
            continue
        new = new & part_mask & ~along.cut
        if np.count_nonzero(new) < STRETCH_PX:
            continue
        if float(np.median(rough[new])) < grain or float(np.median(level[new])) > _CORE_MAX_LEVEL * face_level:
            break
        core |= new
        layers += 1
    return core if layers >= _CORE_MIN_LAYERS else None


def _filled(part_mask: np.ndarray) -> np.ndarray:
    """The region with its holes filled (the pixels its outer boundary encloses)."""
    mask8 = part_mask.astype(np.uint8)
    contours, _ = cv2.findContours(mask8, cv2.RETR_EXTERNAL, cv2.CHAIN_APPROX_NONE)
    out = np.zeros_like(mask8)
    cv2.drawContours(out, contours, -1, 1, thickness=cv2.FILLED)
    return out.astype(bool) | part_mask


def _settled_cut(cut: np.ndarray, part_mask: np.ndarray) -> tuple[np.ndarray, np.ndarray] | None:
    """The cut with the pieces it parts from the face, and what is kept; None past the cut's limits.

    Pieces of the rest under 5 % of its largest (a wall's strip, a rim between two shadows, a
    shadow's island) go with the cut. A cut that is empty, takes more than
    :data:`CUT_MAX_SHARE` of the region or leaves under 50 px is no cut (None).
    """
    keep = part_mask & ~cut
    count, labels, stats, _ = cv2.connectedComponentsWithStats(keep.astype(np.uint8), connectivity=8)
    if count > 2:
        areas = stats[1:, cv2.CC_STAT_AREA]
        pieces = (labels > 0) & (stats[labels, cv2.CC_STAT_AREA] < 0.05 * areas.max())
        cut = cut | pieces
        keep &= ~pieces
    n_cut = int(np.count_nonzero(cut))
    if n_cut == 0 or n_cut > CUT_MAX_SHARE * np.count_nonzero(part_mask) or np.count_nonzero(keep) < 50:
        return None
    return cut, keep


def _face_given_back(cut: np.ndarray, part_mask: np.ndarray, level: np.ndarray, face_level: float) -> np.ndarray:
    """``cut`` less its pixels at the face's level reached from the kept face through such pixels.

    A sweep's layer is the face's outline moved by one vector, so where the found region's
    outer edge (the shadow's soft far edge) runs ragged, or the sweep is a pixel or two long,
    the layer's inner edge runs into the face. Where the shadow is clearly brighter than the
    face (at least :data:`_LEVEL_STEP_RATIO` times its level: a dark face whose shadow another
    light fills, as in mixed light), the face's outline is where the level (smoothed over
    0.7 px) crosses half-way between the face's and the shadow's (the shadow's taken on the
    cut's pixels at least :data:`_GIVE_BACK_SHADOW_PX` from the kept face), as
    :func:`~scanmass.pipeline.photo_shadow_cut._blend_cut_edge` then places it between pixels:
    the cut's pixels below half-way and connected to the kept face through such pixels are face
    (used on tinted matte faces, :func:`_tinted_face_alike`; the shadow's level is read off the
    blur to the paper as well). A cut holding more than :data:`_GIVE_BACK_DARK_SHARE` of pixels darker
    than the face (a single light's core, whose fade out to the paper alone is brighter: the black
    gasket of tests/data/reallight/dev-window-black-t20, its shadow's core 0.4-0.6 of the face's level)
    stays as it is.
    On the render tests/data/reallight/dev-mixed-black3-t17 the black cam's cut (face at 0.046 of
    the paper white, its warm shadow 0.07-0.44) held 3-5 px of face along the shadow side
    (-6.3 % in area; now -0.6 %); where the shadow is darker than the face (a single light) a
    shadow's grain could reach above half-way, and the cut stays as it is.

    Examples
    --------
    A face at 0.05 of the paper with a shadow at 0.3 on its right, cut 3 px too deep:

    >>> level = np.full((20, 40), 0.05, np.float32); level[:, 30:] = 0.3
    >>> mask = np.ones((20, 40), bool); cut = np.zeros_like(mask); cut[:, 27:] = True
    >>> back = _face_given_back(cut, mask, level, 0.05)
    >>> int(np.argmax(back[10])), int(back.sum()) == 20 * 10
    (30, True)
    """
    keep = part_mask & ~cut
    to_keep = cv2.distanceTransform((~keep).astype(np.uint8), cv2.DIST_L2, 3)
    inside = cv2.distanceTransform(part_mask.astype(np.uint8), cv2.DIST_L2, 3)
    deep = cut & (to_keep >= _GIVE_BACK_SHADOW_PX) & (inside >= 2.0)  # off the blur to the paper too
    if np.count_nonzero(deep) < 20 or np.count_nonzero(keep) < 50:
        return cut
    smooth = cv2.GaussianBlur(level.astype(np.float32), (0, 0), 0.7)
    shadow_level = float(np.median(smooth[deep]))
    if shadow_level < _LEVEL_STEP_RATIO * face_level:
        return cut  # no shadow clearly brighter than the face: its grain could cross half-way
    if np.count_nonzero(cut & (smooth * _LEVEL_STEP_RATIO < face_level)) > _GIVE_BACK_DARK_SHARE * np.count_nonzero(
        cut
    ):
        return cut  # a core darker than the face (one light's), only its fade out to the paper brighter
    face_side = cut & (smooth < 0.5 * (face_level + shadow_level))
    count, labels = cv2.connectedComponents((keep | face_side).astype(np.uint8), connectivity=8)
    ids = np.unique(labels[keep])
    return cut & ~np.isin(labels, ids[ids > 0])


#: Distance (px) from the kept face beyond which a cut's pixels give the shadow's level
#: (:func:`_face_given_back`): past the 0.7 px smoothing and the outline's blur.
_GIVE_BACK_SHADOW_PX = 3.0
#: Largest share of a cut's pixels darker than the face (by :data:`_LEVEL_STEP_RATIO`) for
#: :func:`_face_given_back`: more is a shadow's core darker than the face.
_GIVE_BACK_DARK_SHARE = 0.05


def _with_rim(cut: np.ndarray, part_mask: np.ndarray) -> np.ndarray:
    """``cut`` with the pixels of the region it would leave as a rim or an island.

    A strip of the outline's rim (within 2 px of both the cut and the paper) left between a cut
    and the paper would enclose the cut as a false hole once painted: it goes with the cut,
    unless that parts the face; so do pieces of the rest under 5 % of its largest.
    """
    keep = part_mask & ~cut
    count, labels, stats, _ = cv2.connectedComponentsWithStats(keep.astype(np.uint8), connectivity=8)
    if count > 2:
        areas = stats[1:, cv2.CC_STAT_AREA]
        pieces = (labels > 0) & (stats[labels, cv2.CC_STAT_AREA] < 0.05 * areas.max())
        cut, keep = cut | pieces, keep & ~pieces
    to_cut = cv2.distanceTransform((~cut).astype(np.uint8), cv2.DIST_L2, 3)
    to_out = cv2.distanceTransform(part_mask.astype(np.uint8), cv2.DIST_L2, 3)
    strip = keep & (to_cut <= 2.0) & (to_out <= 2.0)
    strip &= ~cv2.dilate((keep & ~strip & (to_cut > 2.0)).astype(np.uint8), np.ones((3, 3), np.uint8)).astype(bool)
    before = cv2.connectedComponents(keep.astype(np.uint8), connectivity=8)[0]
    if strip.any() and cv2.connectedComponents((keep & ~strip).astype(np.uint8), connectivity=8)[0] <= before:
        cut = cut | strip
    return cut


#: How far (px) beyond a sweep's length :func:`_sweep_depth` reads the face's layers.
_FACE_WINDOW_PX = 14
#: Largest share of hole pixels in those layers for a sweep along a given direction.
_FACE_WINDOW_HOLE_SHARE = 0.1
#: How much longer (px) than the sweep of the part that showed the direction a sweep along it may be
#: (:func:`_sweep_depth`'s ``witness_px``): a shadow's length is the thickness over the tangent of the
#: light's elevation (trigonometry), one for all parts of a photo (one thickness given, one light); the
#: slack is :func:`_best_sweep`'s own search (3 px) against a witness read a few px short or long.
_WITNESS_SLACK_PX = 3.0
#: Layers over which the profile must stay past half-way for the face to begin.
_SUSTAIN = 3
#: Smallest ratio of the face's level to the shadow's (or back) for the level step to place
#: the cut; below it the half-way fall of the roughness places it.
_LEVEL_STEP_RATIO = 1.3


#: Layers of a sweep next to the region's boundary that may be passed over before its shadow-like
#: run begins (:func:`_run`, second pass): the outline's blur mixes the paper's light into its
#: first pixel, and the roughness' smoothing (a Gaussian of sigma 1.5 px) takes the bright paper
#: into the level it divides by: 3 px from the paper the paper's share of that level is 2.3 %
#: (the normal distribution's tail beyond 2 sigma), which against a shadow at 1/40 of the paper
#: doubles the level and halves the grain read there. On the committed renders
#: tests/data/reallight/dev-spot-black-t12 and dev-spot-steel-t18 (a black collar and a steel seal
#: under the hard spot, shadows at 0.023 and 0.015 of the paper) the first three layers along the
#: shadow hold 3-31 % (collar) and 23-55 % (seal) shadow-like pixels, the next ones 56-89 %. The
#: run past the rim must hold ``2 + _RIM_LAYERS`` layers (the collar's holds 9.5, the seal's 5.9; a
#: synthetic shadow 5 px wide at the face's level 4.3, whose cut would miss it by 20-40 %).
_RIM_LAYERS = 3


def _run(mask8: np.ndarray, direction: np.ndarray, like: np.ndarray, reach_px: float, skip_rim: bool = False) -> float:
    """The shadow-like layers a sweep along ``direction`` adds (each by its share) before one holds under a half.

    With ``skip_rim``, up to :data:`_RIM_LAYERS` layers under a half next to the boundary are
    passed over (neither counted nor ending the run) before the run begins.
    """
    run = 0.0
    for k, new in _new_layers(mask8, direction, int(1.5 * reach_px) + 4):
        share = np.count_nonzero(new & like) / np.count_nonzero(new)
        if share < 0.5:
            if skip_rim and run == 0.0 and k <= _RIM_LAYERS:
                continue
            break
        run += share
    return run


def _sweep_depth(
    part_mask: np.ndarray,
    like: np.ndarray,
    level: np.ndarray,
    rough: np.ndarray,
    reach_px: float,
    direction: np.ndarray | None = None,
    witness_px: float | None = None,
    past_fade: bool = False,
) -> tuple[np.ndarray, float, np.ndarray, float, np.ndarray | None, bool] | None:
    """The direction (unit x, y) and length (px) of the sweep that added the shadow layer, a face map, the run, the rim passed over and whether :func:`_ringing_bound` bounded it.

    The face map is True where a pixel looks like the face: at the face's level and smooth.
    Where no sweep runs from the boundary itself, the run may begin past the outline's blurred
    rim (:data:`_RIM_LAYERS`); the rim (pixels that near the boundary) is then returned as the
    fifth element (else None) and is neither side's evidence: it neither votes nor counts as
    face, and the caller leaves it out of the shadow's grain.
    The sweep itself is refined by votes: where the face and the shadow differ in level, a pixel
    at the face's level votes for the face, a rough one at the shadow's level for the shadow,
    and a smooth one at the shadow's level not at all (the shadow in the lee of a tall part's
    wall is as smooth as a dark face: taken as face, it turned the steel cam's sweep on the
    committed renders away from the shadow's lee and left a crescent of +7 %); without a level step, a
    smooth pixel votes for the face and a rough one for the shadow.

    The direction is the one (of 32) whose sweep adds the most shadow-like layers (each
    counted by its share of shadow-like pixels) before a layer holds less than a half: a sweep
    askew of the shadow's adds layers of face along one side. Each further
    pixel of sweep adds a layer; the layers are rough and at the shadow's level while in the
    shadow, smooth and at the face's level once in the face. The length is where the layers'
    median level crosses half-way between the two (or, without a clear step of level, where
    their median roughness falls to half the shadow's, bounded where that reads the coding's
    ringing: :func:`_ringing_bound`), interpolated between layers. The face's level is read
    6-14 px beyond the shadow-like layers; where the length so read is longer than the part's
    shadow can be (``reach_px``, or a lower light's measured run: :func:`shadow_cut`'s refusal),
    it is read again to the level of the layers next beyond them (up to 6 px), the face beside
    the shadow: a brushed face's dark sector there and its lit ones further on
    (tests/data/reallight/dev-spot-steel3-t20, the steel cam: the shadow at 0.02 of the paper, the
    dark sector beside it 0.055-0.08, the lit ones 0.14; the half-way to 0.14 lay in the dark
    sector, 16.3 px against a reach of 10.5 px, and the cut was refused; to the sector beside it 8.9 px).
    """
    mask8 = part_mask.astype(np.uint8)
    if np.count_nonzero(like) < 10:
        return None
    # the direction whose sweep keeps adding mostly rough layers the longest (a rough rim on
    # the lit side, a wall's edge or a reflection, is thin; the shadow is deep)
    best_run, unit = 0.0, np.zeros(2)
    if direction is None:
        trials = [np.array([np.cos(a), np.sin(a)]) for a in np.radians(np.arange(0.0, 360.0, 11.25))]
    else:  # the photo's shadow direction, as another part's cut found it (one light)
        trials = [np.asarray(direction, float) / max(float(np.hypot(*direction)), 1e-12)]
    skip_rim = False
    for trial in trials:
        run = _run(mask8, trial, like, reach_px)
        if run > best_run:
            best_run, unit = run, trial
    if best_run < 2:
        # no run from the boundary itself: a dark shadow whose grain the outline's blurred rim
        # hides (the first _RIM_LAYERS layers), as a ring's narrow found region shows it
        # the rim is then cut on no evidence of its own: the run past it must cover it too (a
        # shadow no wider than the rim plus two layers is left to the hidden shadow's bound)
        skip_rim = True
        for trial in trials:
            run = _run(mask8, trial, like, reach_px, skip_rim=True)
            if run > best_run:
                best_run, unit = run, trial
        if best_run < 2 + _RIM_LAYERS:
            return None
    if best_run < 2:
        return None
    if direction is not None and _run(mask8, -unit, like, reach_px, skip_rim=skip_rim) >= best_run:
        return None  # as rough on the side facing the light: the edge's grain, not a shadow on one side
    steps, levels, roughs, shares = [], [], [], []
    for k, new in _new_layers(mask8, unit, int(1.5 * reach_px) + 12):
        steps.append(k)
        levels.append(float(np.median(level[new])))
        roughs.append(float(np.median(rough[new])))
        shares.append(float(np.count_nonzero(new & like)) / float(np.count_nonzero(new)))
    ks, lv, rg, sh = (np.asarray(a, float) for a in (steps, levels, roughs, shares))
    if ks.size < 6:
        return None
    shadow = sh >= 0.5
    first = 0  # the first layer of the run (past the blurred rim where it was passed over)
    while skip_rim and first < len(ks) and not shadow[first] and ks[first] <= _RIM_LAYERS:
        first += 1
    last = first
    while last < len(ks) and shadow[last]:
        last += 1
    if last - first < 2:
        return None
    in_shadow = slice(first + 1, last) if last - first > 2 else slice(first, last)
    face = (ks > ks[last - 1] + 6) & (ks <= ks[last - 1] + _FACE_WINDOW_PX)
    if not face.any():
        return None
    lv_s, lv_f = float(np.median(lv[in_shadow])), float(np.median(lv[face]))
    rg_s, rg_f = float(np.median(rg[in_shadow])), float(np.median(rg[face]))
    # the face beside the shadow: where the sweep read to the face's window is longer than the part's
    # shadow can be, the step to the layers next beyond the run (a brushed face's darker sector)
    near_face = (ks > ks[last - 1]) & (ks <= ks[last - 1] + 6)
    faces = [lv_f]
    if near_face.any():
        faces.append(float(np.median(lv[near_face])))
    for n_face, lv_f in enumerate(faces):
        found = _read_step(
            mask8,
            unit,
            ks,
            lv,
            rg,
            level,
            rough,
            reach_px,
            first,
            last,
            lv_s,
            lv_f,
            rg_s,
            rg_f,
            skip_rim,
            direction,
            witness_px,
            past_fade,
        )
        if found is None or n_face == len(faces) - 1 or not found[5]:
            break
        depth_px = found[1]
        if depth_px <= reach_px + 1.0 or (
            depth_px <= LOW_LIGHT_REACH_FACTOR * reach_px + 1.0 and depth_px <= float(ks[last - 1]) + 1.0
        ):
            break  # within the reach: kept
        near = faces[1]
        if (near - lv_s) * (faces[0] - lv_s) <= 0 or max(near, lv_s) < _LEVEL_STEP_RATIO * max(min(near, lv_s), 1e-6):
            break  # no step to the face beside the shadow
    return None if found is None else (*found[:5], found[6])


def _read_step(
    mask8: np.ndarray,
    unit: np.ndarray,
    ks: np.ndarray,
    lv: np.ndarray,
    rg: np.ndarray,
    level: np.ndarray,
    rough: np.ndarray,
    reach_px: float,
    first: int,
    last: int,
    lv_s: float,
    lv_f: float,
    rg_s: float,
    rg_f: float,
    skip_rim: bool,
    direction: np.ndarray | None = None,
    witness_px: float | None = None,
    past_fade: bool = False,
) -> tuple[np.ndarray, float, np.ndarray, float, np.ndarray | None, bool, bool] | None:
    """:func:`_sweep_depth`'s length from the layers' profile, given the shadow's and the face's level and roughness; whether a level step placed it, and whether :func:`_ringing_bound` bounded it."""
    if max(lv_f, lv_s) >= _LEVEL_STEP_RATIO * max(min(lv_f, lv_s), 1e-6):
        level_step = True
        profile, mid = (lv - lv_s) * np.sign(lv_f - lv_s), 0.5 * abs(lv_f - lv_s)
        at_face_level = (level - lv_s) * np.sign(lv_f - lv_s) >= mid
        smooth = rough <= 0.5 * (rg_s + rg_f)
        face_like, face_sure = at_face_level | smooth, at_face_level & smooth
        # smooth at the shadow's level: the shadow in the lee of a tall part's wall, or a dark
        # face; neither side's evidence
        vote = np.where(at_face_level, -1.0, np.where(smooth, 0.0, 1.0)).astype(np.float32)
    else:
        level_step = False
        profile, mid = rg_s - rg, 0.5 * (rg_s - rg_f)
        face_like = face_sure = rough <= 0.5 * (rg_s + rg_f)
        vote = np.where(face_like, -1.0, 1.0).astype(np.float32)
    start = first + 1 if last - first > 2 else first
    if past_fade and level_step and direction is not None and lv_f > lv_s:
        # along the photo's shadow direction (``past_fade``): the soft shadow's fade next to the outline, brighter
        # than the face, lies on the face's side of half-way; the step to the face lies past the darker core
        while start + 1 < last and profile[start + 1] >= mid:
            start += 1
    rim = cv2.distanceTransform(mask8, cv2.DIST_L2, 3) <= _RIM_LAYERS
    if skip_rim:
        # the blurred rim passed over is neither side's evidence: it neither votes nor counts as face
        vote[rim] = 0.0
        face_sure = face_sure & ~rim
    for i in range(start + 1, len(ks)):
        # the layers from here on at the face's side of half-way, not one layer's blip (8-bit
        # coding of a dark face and a shadow a few codes apart)
        if profile[i] >= mid and np.median(profile[i : i + _SUSTAIN]) >= mid:
            a, b = profile[i - 1], profile[i]
            frac = 0.0 if b <= a else float(np.clip((mid - a) / (b - a), 0.0, 1.0))
            depth = float(ks[i - 1] + frac * (ks[i] - ks[i - 1]))
            if direction is not None and witness_px is not None and depth > witness_px + _WITNESS_SLACK_PX:
                # the other part's shadow, of the same thickness under the same light, is as long: the
                # half-way of this grain lies past the face's edge, in its own rough rim
                depth = witness_px + _WITNESS_SLACK_PX
            best_unit, best_depth = _best_sweep(mask8, vote, depth * unit)
            bounded = False
            if not level_step:
                # the roughness' half-way may lie in the coding's ringing at the bright outline
                bound = _ringing_bound(mask8, unit, ks, lv, rg, depth, first, lv_f, level, rough, reach_px)
                if bound is not None and bound < best_depth:
                    best_depth, bounded = bound, True
            # the run of shadow-like layers from the outline: how far the shadow's grain reaches
            run, passed = float(ks[last - 1]), (rim if skip_rim else None)
            return best_unit, best_depth, face_sure, run, passed, level_step, bounded
    return None


#: Smallest ratio of the face's level to the shadow's next to the outline for :func:`_ringing_bound`
#: to read the shadow's visible width from the level (a step of 17-63 % on the committed dev renders
#: of thin brackets under the spot; 8-bit coding at 0.016 of the paper is 0.0009 a code step: 2.8
#: code steps there).
_RINGING_STEP_RATIO = 1.1


def _ringing_bound(
    mask8: np.ndarray,
    unit: np.ndarray,
    ks: np.ndarray,
    lv: np.ndarray,
    rg: np.ndarray,
    depth: float,
    first: int,
    lv_f: float,
    level: np.ndarray,
    rough: np.ndarray,
    reach_px: float,
) -> float | None:
    """The shadow's visible width (px along ``unit``) where the roughness' half-way at ``depth`` reads the coding's ringing; else None.

    JPEG coding rings beside a bright edge: its error over the 8x8 blocks the outline crosses
    reaches a few pixels into the region, the same on every side of it, and divided by the level
    of a face at 0.02-0.04 of the paper it is as rough as a shadow's grain (common practice: the
    block transform's quantisation error spreads over the block). Where the layer at the
    roughness' half-way is no rougher than the roughest layer within 2 px as deep in on the side
    facing the light (the sweep's opposite, where no shadow lies), the half-way is read in that
    ringing, not in the shadow: the shadow's own evidence is then its level, which the ringing (a
    signed error, about zero over a layer) leaves in the layers' medians. The shadow's level is read in the two
    layers next to the outline from the first past its first pixel that is darker than the face
    (within :data:`_RIM_LAYERS` + 1: the outline's blur mixes the paper's light into its first
    layers), the face's beyond the run; where the face is at least :data:`_RINGING_STEP_RATIO`
    brighter, the width is where the layers' median level crosses half-way to the face's and
    stays past it for :data:`_SUSTAIN` layers.
    """
    # the side facing the light, its layers within 2 px of the same depth
    lit = [
        float(np.median(rough[new]))
        for k, new in _new_layers(mask8, -unit, int(math.ceil(depth)) + 3)
        if k >= depth - 2
    ]
    at = np.nonzero(ks >= depth)[0]
    if not lit or not at.size or rg[at[0]] > max(lit):
        return None  # rougher than the light's side as deep in: the shadow's grain
    # the shadow next to the outline: from the first layer past its first pixel that is darker than the
    # face (a layer of the outline's blur mixes the paper's light in), and the one after it
    darker = np.nonzero((ks >= 2) & (lv < lv_f))[0]
    if not darker.size or ks[darker[0]] > _RIM_LAYERS + 1:
        return None
    near = slice(int(darker[0]), int(darker[0]) + 2)
    lv_n = float(np.median(lv[near]))
    if lv_f < _RINGING_STEP_RATIO * lv_n:
        return None
    mid = 0.5 * (lv_f + lv_n)
    for i in range(max(first, int(darker[0])) + 1, len(ks)):
        if ks[i] > depth:
            break
        if lv[i] >= mid and np.median(lv[i : i + _SUSTAIN]) >= mid:
            a, b = lv[i - 1], lv[i]
            frac = 0.0 if b <= a else float(np.clip((mid - a) / (b - a), 0.0, 1.0))
            return float(ks[i - 1] + frac * (ks[i] - ks[i - 1]))
    return None


def dark_tinted_face(colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray, reach_px: float) -> bool:
    """Whether a region's face (deeper than ``reach_px``) is dark and tinted as a dark plastic's (:func:`_is_dark`).

    Examples
    --------
    >>> paper = np.array([0.7, 0.72, 0.74]); img = np.tile(paper, (60, 60, 1))
    >>> mask = np.zeros((60, 60), bool); mask[10:50, 10:50] = True
    >>> img[mask] = 0.03 * paper * np.array([1.15, 1.0, 1.0])  # redder than the paper
    >>> dark_tinted_face(img, mask, paper, 5.0)
    True
    >>> img[mask] = 0.03 * paper  # neutral: a metal's or the shadow's colour
    >>> dark_tinted_face(img, mask, paper, 5.0)
    False
    """
    mask8 = part_mask.astype(np.uint8)
    if mask8.sum() < 50:
        return False
    q = (colour_lin / np.asarray(paper_rgb)).astype(np.float32)
    inside = cv2.distanceTransform(mask8, cv2.DIST_L2, 3)
    interior = inside > min(reach_px + 2.0, 0.75 * float(inside.max()))
    if np.count_nonzero(interior) < 50:
        return False
    return _is_dark(cv2.GaussianBlur(q, (0, 0), 1.5), interior)


#: A hole's bottom is darker than this share of a dark face's level (as :data:`~scanmass.segment.shadow.PIT_DEPTH`).
BOTTOM_DEPTH = 0.5
#: Smallest area (px) of a hole's bottom that :func:`hole_bottoms` opens.
BOTTOM_MIN_PX = 12


def hole_bottoms(colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray) -> np.ndarray:
    """(H, W) bool: the dark bottoms and walls of through-holes inside a dark tinted face, to open as holes.

    A through-hole in a thick part shows, inside its top edge, its far wall and its bottom:
    paper in the wall's shadow, or lit where the light reaches it. A dark plastic face is
    flat and lies in the light: nothing on it is darker than it but a hole (a cast shadow
    falls on the paper beside it, not on its top face). So a region inside the face, clear of
    its outer outline (2 px: the outline's blur), whose median level is under
    :data:`BOTTOM_DEPTH` of the face's is a hole; its pixels are those (smoothed over 1 px)
    below half-way between the face's level and the region's, so that painted as paper the hole
    opens to its top edge. On the committed render tests/data/reallight/spot-black-t20 the
    black disc's 8 mm deep bore (its bottom in the disc's shadow, 0.45 of the face's level, its
    wall 0.2) and the bracket's holes (a lit crescent of the bottom, found as a hole, and the
    rest dark) are such regions. All False for a face that is not dark and tinted
    (:func:`dark_tinted_face`).

    Examples
    --------
    >>> paper = np.array([0.7, 0.72, 0.74]); img = np.tile(paper, (60, 60, 1))
    >>> mask = np.zeros((60, 60), bool); mask[10:50, 10:50] = True
    >>> img[mask] = 0.03 * paper * np.array([1.15, 1.0, 1.0])
    >>> img[25:33, 25:33] = 0.008 * paper  # a hole's dark bottom, 8 px across
    >>> bottoms = hole_bottoms(img, mask, paper)
    >>> int(bottoms.sum()), bool(bottoms[25:33, 25:33].all())
    (64, True)
    """
    mask8 = part_mask.astype(np.uint8)
    none = np.zeros(part_mask.shape, bool)
    if mask8.sum() < 50:
        return none
    q = (colour_lin / np.asarray(paper_rgb)).astype(np.float32)
    filled = np.zeros_like(mask8)
    contours, _ = cv2.findContours(mask8, cv2.RETR_EXTERNAL, cv2.CHAIN_APPROX_NONE)
    cv2.drawContours(filled, contours, -1, 1, thickness=-1)
    from_outline = cv2.distanceTransform(filled, cv2.DIST_L2, 3)
    inside = cv2.distanceTransform(mask8, cv2.DIST_L2, 3)
    interior = inside > min(4.0, 0.75 * float(inside.max()))
    if np.count_nonzero(interior) < 50:
        return none
    smooth = cv2.GaussianBlur(q, (0, 0), 1.5)
    if not _is_dark(smooth, interior):
        return none
    level = cv2.GaussianBlur(q.mean(axis=2), (0, 0), 1.0)
    face = float(np.median(level[interior]))
    dark = (level < BOTTOM_DEPTH * face) & (from_outline > 2.0) & (filled > 0)
    count, labels = cv2.connectedComponents(dark.astype(np.uint8), connectivity=8)
    out = none.copy()
    for k in range(1, count):
        seed = labels == k
        if np.count_nonzero(seed) < BOTTOM_MIN_PX:
            continue
        own = float(np.median(level[seed]))
        grown = (level < 0.5 * (face + own)) & (from_outline > 2.0) & (filled > 0)
        n, lab = cv2.connectedComponents(grown.astype(np.uint8), connectivity=8)
        ids = np.unique(lab[seed])
        region = np.isin(lab, ids[ids > 0]) & part_mask
        if np.count_nonzero(region) >= BOTTOM_MIN_PX:
            out |= region
    return out


def _tinted_face_alike(smooth: np.ndarray, interior: np.ndarray) -> np.ndarray:
    """(H, W) bool: pixels at a tinted matte face's levels and colour, whatever their grain.

    Beside a bright edge (the paper, a lit side wall) JPEG coding rings into a dark face: its
    pixels there are as rough as a shadow's grain, and the 0.01 floor of the paper-colour test
    takes a dark face of a plastic's tint for neutral. What the ringing keeps is the face's
    level and colour. :func:`_dark_face_alike` covers faces under :data:`DARK_FACE_LEVEL` and
    tinted by twice :data:`_DARK_CHROMA_STEP` (:func:`_is_dark`, whose rules stay as they are: on
    the committed render tests/data/reallight/spot-black-t20 these pixels left out of its general
    sweep moved the black bracket by 0.3 %); this covers the other matte faces of one colour up to
    :data:`_TINTED_FACE_LEVEL` tinted by :data:`_TINTED_FACE_TINT` to :data:`_DARK_TINT_MAX`
    (not steel, -0.05 to -0.06, nor brass, +1.07), whose levels spread at most
    :data:`_TINTED_FACE_SPREAD` times (90th over 10th percentile: a metal mirroring the lights
    spreads more). A pixel between the face's 10th percentile over :data:`_LEVEL_STEP_RATIO` and
    its 90th times it, nearer the face's tint than the paper's (0), is face-alike. On the render
    tests/data/reallight/dev-mixed-black2-t22 (filmic curve) the black plate's face reads 0.078 of
    the paper, tint -0.09, and the ringing beside its lit wall ran 10-14 px into the face (-8.6 %
    in area); the thin disc's face 0.12-0.20 with a warm sheen, tint +0.22 (-5.6 %).
    All False for other faces.

    ``smooth`` is the crop's colour over the paper white (per channel), smoothed; ``interior``
    the face's pixels.

    Examples
    --------
    >>> smooth = np.ones((30, 30, 3), np.float32); interior = np.zeros((30, 30), bool)
    >>> smooth[5:25, 5:25] = 0.08 * np.array([1.05, 1.0, 0.95]); interior[10:20, 10:20] = True
    >>> alike = _tinted_face_alike(smooth, interior)
    >>> bool(alike[5:25, 5:25].all()), bool(alike[:5].any())
    (True, False)
    >>> smooth[5:25, 5:25] = 0.08  # neutral: a shadow's or a metal's colour
    >>> bool(_tinted_face_alike(smooth, interior).any())
    False
    """
    sm = smooth.mean(axis=2)
    none = np.zeros(sm.shape, bool)
    face_level = float(np.median(sm[interior]))
    if not 0 < face_level < _TINTED_FACE_LEVEL:
        return none
    lo, hi = np.quantile(sm[interior], [0.1, 0.9])
    if hi > _TINTED_FACE_SPREAD * max(float(lo), 1e-6):
        return none
    tint = _tint(smooth, sm)
    face_tint = float(np.median(tint[interior]))
    if not _TINTED_FACE_TINT <= abs(face_tint) <= _DARK_TINT_MAX:
        return none
    within = (sm * _LEVEL_STEP_RATIO > lo) & (sm < _LEVEL_STEP_RATIO * hi)
    return within & (np.abs(tint - face_tint) < np.abs(tint))


#: Largest level (share of the paper white) of a face for :func:`_tinted_face_alike`.
_TINTED_FACE_LEVEL = 0.3
#: Largest ratio of a face's levels (90th to 10th percentile) for :func:`_tinted_face_alike`; as
#: :data:`scanmass.segment.colourshadow._FACE_LEVEL_SPREAD` (black plastic 1.1-1.7, brushed steel 6).
_TINTED_FACE_SPREAD = 2.5
#: Smallest tint (blue minus red over the level, the paper's 0) of a face for :func:`_tinted_face_alike`:
#: the black plastic of the committed renders reads -0.09 to -0.17 (+0.22 under a warm sheen),
#: brushed steel -0.05 to -0.06.
_TINTED_FACE_TINT = 0.08


def _is_dark(smooth: np.ndarray, interior: np.ndarray) -> bool:
    """Whether the face (``interior``) is a dark tinted face that :func:`_dark_face_alike` can tell apart.

    Dark: under :data:`DARK_FACE_LEVEL` of the paper. Tinted: its tint (blue minus red over
    the level, the paper's being 0) at least :data:`_DARK_CHROMA_STEP` from the paper's and
    at most :data:`_DARK_TINT_MAX` (a dark plastic; a metal's own colour, brass's, lies
    far beyond it, and a metal under a spotlight is dark too: the steel and brass parts of the
    committed renders are 0.02-0.06 of the paper, steel at a tint of -0.05 to -0.06, brass
    +1.07 to +1.09, the black plastic -0.13 to -0.16; on the metals the cut of
    :func:`_sweep_depth` stays).
    """
    sm = smooth.mean(axis=2)
    face_level = float(np.median(sm[interior]))
    if not 0 < face_level < DARK_FACE_LEVEL:
        return False
    tint = abs(float(np.median(_tint(smooth, sm)[interior])))
    return 2 * _DARK_CHROMA_STEP <= tint <= _DARK_TINT_MAX


def _dark_sweep(
    part_mask: np.ndarray,
    like: np.ndarray,
    level: np.ndarray,
    rough: np.ndarray,
    reach_px: float,
    alike: np.ndarray,
    inside: np.ndarray,
) -> tuple[np.ndarray, float, np.ndarray, float, np.ndarray | None, bool] | None:
    """:func:`_sweep_depth` for a dark face: the sweep whose layer holds the most shadow votes net.

    A dark part's outline holds more than its shadow that looks rough and neutral: the bottom
    of a deep hole and, where the wall faces the camera, the lit wall. A sweep askew of the
    shadow's adds a strip of those along another side, one thin layer per step, so that the
    share of shadow-like pixels in each new layer (:func:`_sweep_depth`'s direction) stays high
    for a wrong direction too; the black bracket of the committed render
    tests/data/reallight/spot-black-t20 was swept 33 degrees askew and 16-20 px deep (its shadow
    is 10 px wide) and its cut refused. Here the levels of the shadow and the face are taken
    from the shadow-like pixels at least 2 px inside the outline (off the outline's blur) and
    from the face's interior, each pixel votes as in :func:`_sweep_depth` (a lit wall, brighter
    than the face, for the face), and every direction (of 32) and whole-pixel depth up to
    ``reach_px`` + 1 is scored by the votes its layer holds; :func:`_best_sweep` refines the
    best one.
    """
    mask8 = part_mask.astype(np.uint8)
    deep = like & (inside >= 2.0)
    if np.count_nonzero(deep) < 10:
        deep = like
    if np.count_nonzero(deep) < 10:
        return None
    lv_s, lv_f = float(np.median(level[deep])), float(np.median(level[alike]))
    rg_s, rg_f = float(np.median(rough[deep])), float(np.median(rough[alike]))
    smooth = rough <= 0.5 * (rg_s + rg_f)
    if max(lv_f, lv_s) >= _LEVEL_STEP_RATIO * max(min(lv_f, lv_s), 1e-6):
        at_face_level = (level - lv_s) * np.sign(lv_f - lv_s) >= 0.5 * abs(lv_f - lv_s)
        face_sure = at_face_level & smooth
        vote = np.where(at_face_level, -1.0, np.where(smooth, 0.0, 1.0)).astype(np.float32)
    else:
        face_sure = smooth
        vote = np.where(smooth, -1.0, 1.0).astype(np.float32)
    best_score, best_step = 0.0, None
    stop = int(math.ceil(reach_px)) + 2
    for angle in np.radians(np.arange(0.0, 360.0, 11.25)):
        direction = np.array([np.cos(angle), np.sin(angle)])
        total = 0.0
        for k, new in _new_layers(mask8, direction, stop):
            total += float(vote[new].sum())
            if total > best_score:
                best_score, best_step = total, k * direction
    if best_step is None or best_score < 2 * STRETCH_PX:
        return None
    best_unit, best_depth = _best_sweep(mask8, vote, best_step)
    return best_unit, best_depth, face_sure, 0.0, None, False  # no run measured: held to the 30-degree reach


def _best_sweep(mask8: np.ndarray, vote: np.ndarray, guess: np.ndarray) -> tuple[np.ndarray, float]:
    """The whole-pixel sweep near ``guess`` (x, y px) whose layer holds the most shadow votes net.

    ``vote`` is +1 where a pixel looks like the shadow, -1 where it looks like the face; the
    search covers whole-pixel vectors within 3 px and 15 degrees of the guess (a sweep in the
    wrong direction cuts into the face along one side and leaves shadow along another).
    """
    length = float(np.hypot(*guess))
    unit = guess / max(length, 1e-9)
    best, best_score = guess, -np.inf
    r = int(np.ceil(length + 3))
    for dy in range(-r, r + 1):
        for dx in range(-r, r + 1):
            v = np.array([dx, dy], float)
            n = float(np.hypot(dx, dy))
            if n < 1 or abs(n - length) > 3 or float(v @ unit) < n * np.cos(np.radians(15)):
                continue
            score = float(vote[_sweep_layer(mask8, v)].sum())
            if score > best_score:
                best, best_score = v, score
    n = float(np.hypot(*best))
    return best / n, n


def _line_kernel(step: np.ndarray) -> tuple[np.ndarray, tuple[int, int]]:
    """A kernel holding the pixel segment from (0, 0) to ``step`` (x, y), and its anchor (the origin)."""
    dx, dy = int(round(step[0])), int(round(step[1]))
    w, h = abs(dx) + 1, abs(dy) + 1
    kernel = np.zeros((h, w), np.uint8)
    ax, ay = (0 if dx >= 0 else w - 1), (0 if dy >= 0 else h - 1)
    cv2.line(kernel, (ax, ay), (ax + dx, ay + dy), 1, 1)
    return kernel, (ax, ay)


def _new_layers(mask8: np.ndarray, direction: np.ndarray, stop: int) -> Iterator[tuple[int, np.ndarray]]:
    """(k, pixels) the sweep by ``k * direction`` adds beyond the sweep by ``k - 1``, for k in 1 .. stop - 1 (empty ones left out)."""
    prev = np.zeros(mask8.shape, bool)
    for k in range(1, stop):
        layer = _sweep_layer(mask8, k * direction)
        new = layer & ~prev
        prev = layer
        if new.any():
            yield k, new


def _sweep_layer(mask8: np.ndarray, step: np.ndarray) -> np.ndarray:
    """Pixels of the mask from which a step of ``step`` (px, x y) leaves it: the layer a sweep adds."""
    kernel, anchor = _line_kernel(step)
    return (mask8 > 0) & (cv2.erode(mask8, kernel, anchor=anchor, borderValue=0) == 0)
