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
the outline places the cut instead (:func:`~scanmass.segment.shadowsweep._ringing_bound`). Where
the face's level read beyond the shadow's grain is a brighter sector than the one beside the shadow
(brushed metal), and the sweep so read is longer than the part's shadow can be, the step to the face
beside the shadow is read instead.

On a dark tinted face (black plastic: :func:`dark_tinted_face`) JPEG ringing near the outline is
as rough as a shadow's grain; there pixels at the face's level and colour are never shadow, the
sweep is chosen by votes over all directions (:func:`_dark_sweep`), and the dark walls and
bottoms of its through-holes are found to be opened (:func:`hole_bottoms`).

The pipeline paints the cut pixels with the paper's level and measures the image again, so the
outline lands on the step between the face and the shadow; where nothing is cut, the warning
and the term of :mod:`scanmass.segment.shadow`'s check stay.

This module holds the cut's decision (:func:`shadow_cut`, and along a direction another part
showed: :func:`core_cut`, :func:`sweep_direction`). Its pieces live beside it:
:mod:`~scanmass.segment.shadowlayer` (the cut found, the grain, the sweep's layers, a cut settled
in its region), :mod:`~scanmass.segment.shadowsweep` (the sweep's direction and length),
:mod:`~scanmass.segment.softshadow` (a soft shadow's fade, core and the paper past a cut) and
:mod:`~scanmass.segment.darkface` (dark and tinted matte faces, hole bottoms). The public names of
those pieces listed in ``__all__`` stay importable from here; the package imports each name from
the module that defines it.
"""

from __future__ import annotations

from dataclasses import replace

import cv2
import numpy as np

from scanmass.segment.darkface import (
    _DARK_CHROMA_STEP,
    _dark_face_alike,
    _is_dark,
    _tinted_face_alike,
    dark_tinted_face,
    hole_bottoms,
)
from scanmass.segment.shadowlayer import (
    _MAX_DEPTH,
    CUT_MIN_TEXTURE_RATIO,
    STRETCH_PX,
    ShadowCut,
    _edge_px,
    _face_given_back,
    _face_interior,
    _filled,
    _reached,
    _settled_cut,
    _sweep_layer,
    _tint,
    _with_rim,
    roughness,
)
from scanmass.segment.shadowsweep import (
    _FACE_WINDOW_HOLE_SHARE,
    _FACE_WINDOW_PX,
    LOW_LIGHT_REACH_FACTOR,
    _dark_sweep,
    _sweep_depth,
)
from scanmass.segment.softshadow import _FADE_LEVEL_RATIO, _fade_beyond, _grainy_core, _lit_beyond, fade_cut, lit_beyond

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


#: Largest share of face-like pixels in a cut (more: the sweep runs through the face).
CUT_MAX_FACE_SHARE = 0.3
#: Channel tolerance of the paper's colour for a (smoothed) shadow pixel, relative.
_CHROMA_TOL = 0.2


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
        too little face left, or a cut of more than :data:`~scanmass.segment.shadowlayer.CUT_MAX_SHARE` of the region.

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
    interior = _face_interior(inside, reach_px)
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
    # a sweep bounded below the coding's ringing (:func:`~scanmass.segment.shadowsweep._ringing_bound`) is the
    # outer ring's too: a hole's rim rings as the outline does, beside the hole's bright floor
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
    edge_px = _edge_px(cut, keep)
    if not dark:
        # a dark face's shadow fades on past the outline: painted as paper with the cut
        cut = cut | _fade_beyond(cut, part_mask, smooth, interior, depth_px * unit)
    found = ShadowCut(
        cut=cut,
        cut_px=n_cut,
        edge_px=edge_px,
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
    return replace(along, cut=cut, cut_px=int(np.count_nonzero(cut & part_mask)), edge_px=_edge_px(cut, keep))
