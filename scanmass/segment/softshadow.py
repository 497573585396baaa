"""A low, wide light's soft shadow beside a metal part: its fade, its core, and the paper past a cut.

Under a wide light (a window) a thick part's shadow fades out over many pixels and has a core lit by
the room alone. Inside the outline of a dark tinted metal face the fade's inner end is cut by its
level and the paper's tint (:func:`fade_cut`); past the outline, the fade beyond a sweep's cut is
painted with it (:func:`_fade_beyond`); beyond a sweep's level step, the layers as grainy as the
shadow at the face's level are its core (:func:`_grainy_core`). A low light's shadow dims the paper
past the outline on its own side: a sweep or a cut with brighter paper beyond it is no such shadow
(:func:`_lit_beyond`, :func:`lit_beyond`). Used by :mod:`scanmass.segment.castshadow` (which
re-exports the public names).
"""

from __future__ import annotations

import cv2
import numpy as np

from scanmass.segment.darkface import _DARK_CHROMA_STEP, DARK_FACE_LEVEL
from scanmass.segment.shadowlayer import (
    _MAX_DEPTH,
    CUT_MIN_TEXTURE_RATIO,
    STRETCH_PX,
    ShadowCut,
    _edge_px,
    _face_interior,
    _filled,
    _line_kernel,
    _new_layers,
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
    _RIM_LAYERS,
    _SUSTAIN,
    _WITNESS_SLACK_PX,
    LOW_LIGHT_REACH_FACTOR,
    _best_sweep,
    _crossing,
)

__all__ = ["fade_cut", "lit_beyond", "tint_step_cut"]


def _swept_on(cut: np.ndarray, part_mask: np.ndarray, step: np.ndarray) -> np.ndarray:
    """(H, W) bool: the pixels outside the region that ``cut`` swept on by ``step`` (x, y px) reaches."""
    kernel, anchor = _line_kernel(-np.asarray(step, float))
    return cv2.dilate(cut.astype(np.uint8), kernel, anchor=anchor).astype(bool) & ~part_mask


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
    level against the 0.05 step). Not after a dark plastic face's own sweep
    (:func:`~scanmass.segment.shadowsweep._dark_sweep`), whose cut's edge is blended by the caller;
    after the general sweep that follows its refusal, as on any dark face
    (tests/data/reallight/dev-mixed-black2-t22's black plate 6.5 mm: -4.19 % -> -3.82 %, no thickness
    given).

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
    zone = _swept_on(cut, part_mask, step)
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


#: Smallest level of a fade pixel, as a multiple of the face's (:func:`fade_cut`).
_FADE_LEVEL_RATIO = 3.0
#: Largest level of the paper just outside the outline (1.5-5 px off it, smoothed over 4 px),
#: as a share of the paper's further off (12-20 px), for a stretch to lie in a fading shadow
#: (:func:`fade_cut`).
_FADE_DIM = 0.8


def fade_cut(colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray, reach_px: float) -> ShadowCut | None:
    """The inner end of a soft shadow's fade inside the outline of a dark tinted metal face.

    A metal face under a low side light (brushed steel in window light: 0.02-0.06 of the paper, tinted
    -0.06 to -0.10 blue minus red over its level) is as grainy as the shadow beside it, so
    :func:`~scanmass.segment.castshadow.shadow_cut` refuses; but the soft shadow's inner end is no face:
    it rises from several times the face's level outwards to the paper, with the paper's tint (0), and
    the paper beyond it is still dimmed (a soft shadow fades over many px; on the lit side the paper
    just off the outline is as bright as further off). So the pixels of the region within ``reach_px``
    of its boundary, reached from it, at :data:`_FADE_LEVEL_RATIO` or more of the face's level (under
    :data:`_MAX_DEPTH` of the paper) and nearer the paper's tint than the face's, are cut where the
    paper just outside the boundary near them is under :data:`_FADE_DIM` of the paper further off. The
    outline's own blur (one or two such pixels all round) is left where the paper beside it is lit, so
    the outline stays on the face's step there as it then lands on it in the shadow. On the committed
    render tests/data/reallight/window-steel-t25 the steel gasket's shadow side (and the far side of its
    hole, in the wall's shadow) holds 1-3 such pixels (0.15-0.3 of the paper) inside its outline, the
    paper beyond at 0.45-0.8. The cut also holds the pixels just outside the boundary beside it (within
    3 px), so that painted as paper the shadow side reads as paper up to the face (``cut_px`` counts
    only the region's pixels).

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
    interior = _face_interior(inside, reach_px)
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
    rough = roughness(level)
    # the rest of the fade just outside (3 px) goes with it: painted as paper, a strip of the
    # cut between the face and the darker fade outside would read as a hole
    beyond = ~part_mask & (outside <= 3.0) & cv2.dilate(cut.astype(np.uint8), np.ones((7, 7), np.uint8)).astype(bool)
    return ShadowCut(
        cut=cut | beyond,
        cut_px=n_cut,
        edge_px=_edge_px(cut, keep),
        texture_face=float(np.median(rough[interior])),
        texture_shadow=float(np.median(rough[cut])),
        level_face=float(np.median(sm[keep])),
        level_shadow=float(np.median(sm[cut])),
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
    zone = _swept_on(cut.cut, part_mask, np.asarray(cut.direction, float) * cut.length_px)
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

    Under a wide, low light (a window) a thick metal part's shadow fades from the paper to a core lit by
    the room alone, as dark as the metal face; the sweep's level step
    (:func:`~scanmass.segment.shadowsweep._read_step`) then lies at the fade's inner end, and the core
    stays in the part. The layers a sweep along the same direction adds next are taken while each is
    rough (median roughness at least half the sweep's cut's and :data:`CUT_MIN_TEXTURE_RATIO` times the
    face's) and no brighter than :data:`_CORE_MAX_LEVEL` times the face's level, up to ``reach_px`` and,
    where another part's sweep showed the direction, within :data:`_WITNESS_SLACK_PX` of its length (one
    thickness, one light: one shadow length; beyond it the grain is the face's own rough rim, as on the
    committed render tests/data/reallight/dev-window-low-steel-t15, whose 7 mm bracket lost 10 % to it).
    None unless at least :data:`_CORE_MIN_LAYERS` such layers follow the step.
    """
    if along.direction is None or along.length_px is None:
        return None
    rough = roughness(level)
    inside = cv2.distanceTransform(part_mask.astype(np.uint8), cv2.DIST_L2, 3)
    interior = _face_interior(inside, reach_px) & ~along.cut
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


#: Smallest share of a cut's pixels darker than the tinted face's median level for :func:`tint_step_cut`: one
#: light's shadow has a core the light does not reach. Under a window (an area light some 30-45 degrees across,
#: trigonometry) the core of a part t thick reaches about t out from its wall, the fade out to about 3.7 t
#: (a window's lowest edge 15 degrees up): on the committed render
#: tests/data/reallight/dev-lens-window-steel2-t16 the 2.5 mm steel bracket's shadow holds 6 layers of core
#: (0.011-0.018 of the paper white, the face 0.13) against 5 of fade (0.16-0.48).
_TINT_CUT_MIN_CORE = 0.3
#: Smoothing (Gaussian sigma, px) of the colours :func:`tint_step_cut` reads the tint from. A pixel's tint is
#: a ratio of channels, and a mix of a bright face and a dark core across a step takes the face's: smoothed
#: over 1.5 px, the half-way of a step from a face at 0.12 of the paper white to a core at 0.015 reads 1.3 px
#: into the core (the docstring's example); over 0.7 px, 0.3 px.
_TINT_SMOOTH_PX = 0.7


def _tint_reading(
    colour_lin: np.ndarray, mask8: np.ndarray, paper_rgb: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The crop's colour over the paper white, its tint smoothed over :data:`_TINT_SMOOTH_PX`, and the distance inside the region.

    What :func:`tint_step_cut` and :func:`tint_bound` read a part by (``mask8``: the region as uint8).
    """
    q = (np.asarray(colour_lin, np.float32) / np.asarray(paper_rgb, np.float32)).astype(np.float32)
    smooth = cv2.GaussianBlur(q, (0, 0), _TINT_SMOOTH_PX)
    return q, _tint(smooth, smooth.mean(axis=2)), cv2.distanceTransform(mask8, cv2.DIST_L2, 3)


def tint_step_cut(
    colour_lin: np.ndarray,
    part_mask: np.ndarray,
    paper_rgb: np.ndarray,
    reach_px: float,
    direction: np.ndarray,
    witness_px: float | None = None,
) -> ShadowCut | None:
    """A soft shadow inside a tinted metal part, swept along the photo's shadow direction to its step of tint.

    A cast shadow is the paper in less light: its fade and its core keep the paper's tint, while a metal face
    that mirrors the light (brushed steel in window light) is tinted by it (at least :data:`_DARK_CHROMA_STEP`
    blue minus red over its level from the paper's 0). Where the shadow's grain is too close to the brushed
    face's for :func:`~scanmass.segment.castshadow.shadow_cut` (on the committed render
    tests/data/reallight/dev-lens-window-steel2-t16 the 2.5 mm steel bracket's core 2.3 times as rough as its
    face, its fade 0.7-1.5 times), the tint places the step: the region's outer ring is swept along
    ``direction`` (the photo's light, which another part showed: one light casts every shadow one way) and the
    length is where the layers' median tint (smoothed over :data:`_TINT_SMOOTH_PX`, as a share of the face's) crosses half-way
    from the paper's to the face's and stays past it for :data:`~scanmass.segment.shadowsweep._SUSTAIN` layers;
    a search of nearby whole-pixel vectors by each pixel's vote (nearer the paper's tint than the face's: +1,
    else -1; the outline's blur, within :data:`~scanmass.segment.shadowsweep._RIM_LAYERS` px of it, none)
    refines it (:func:`~scanmass.segment.shadowsweep._best_sweep`).

    The cut is refused (None) where the face is not tinted, where the same reading on the side facing the light
    (the sweep's opposite, where no shadow lies) reaches within 2 + :data:`~scanmass.segment.shadowsweep._RIM_LAYERS`
    px of it (the outline's blur has the paper's tint all round), where it is longer than a light 15 degrees up
    casts (:data:`~scanmass.segment.shadowsweep.LOW_LIGHT_REACH_FACTOR` times ``reach_px``) or, given the sweep of
    the part that showed the direction, than that length and :data:`~scanmass.segment.shadowsweep._WITNESS_SLACK_PX`
    (one thickness given, one light: one shadow length), where the paper just past the outline is brighter on
    the shadow's side than on the other (:func:`_lit_beyond`), where the layers read as the face lie across a
    hole, where under :data:`_TINT_CUT_MIN_CORE` of the cut is darker than the face (no core the light misses),
    or where the cut takes more than :data:`~scanmass.segment.shadowlayer.CUT_MAX_SHARE` of the region.

    Examples
    --------
    A face tinted as steel in window light 40 px wide; on its right a shadow of the paper's tint found as part:
    a core 6 px wide darker than the face, then a fade 5 px wide out to the paper. The sweep along +x cuts both,
    the face is kept.

    >>> paper = np.array([0.7, 0.72, 0.74]); img = np.tile(paper, (80, 110, 1))
    >>> mask = np.zeros((80, 110), bool); mask[15:65, 15:66] = True
    >>> img[15:65, 15:55] = 0.12 * paper * np.array([1.06, 1.0, 0.94])
    >>> img[15:65, 55:61] = 0.015 * paper
    >>> img[15:65, 61:66] = paper * np.linspace(0.15, 0.45, 5)[None, :, None]
    >>> img[15:65, 66:72] = paper * np.linspace(0.55, 0.9, 6)[None, :, None]
    >>> cut = tint_step_cut(img, mask, paper, 12.0, np.array([1.0, 0.0]))
    >>> bool(cut.cut[20:60, 56:66].all()), bool(cut.cut[:, :54].any()), cut.direction
    (True, False, (1.0, 0.0))
    """
    mask8 = part_mask.astype(np.uint8)
    if mask8.sum() < 50:
        return None
    q, tint, inside = _tint_reading(colour_lin, mask8, paper_rgb)
    level = q.mean(axis=2)
    interior = _face_interior(inside, reach_px)
    if np.count_nonzero(interior) < 50:
        return None
    face_tint = float(np.median(tint[interior]))
    if abs(face_tint) < _DARK_CHROMA_STEP:
        return None
    share = tint / face_tint  # 1 at the face's tint, 0 at the paper's
    unit = np.asarray(direction, float) / max(float(np.hypot(*direction)), 1e-12)
    outer = _filled(part_mask).astype(np.uint8)
    longest = LOW_LIGHT_REACH_FACTOR * reach_px + 1.0
    if witness_px is not None:
        longest = min(longest, witness_px + _WITNESS_SLACK_PX)
    stop = int(longest) + _FACE_WINDOW_PX + 2
    depth = _tint_step(outer, part_mask, unit, share, stop)
    lit = _tint_step(outer, part_mask, -unit, share, stop)
    if depth is None or depth > longest or depth - (0.0 if lit is None else lit) < 2 + _RIM_LAYERS:
        return None
    if _lit_beyond(part_mask, unit, level):
        return None
    # the outline's blur (within _RIM_LAYERS px of the boundary) has the paper's tint all round: no vote
    vote = np.where(share < 0.5, 1.0, -1.0).astype(np.float32) * (part_mask & (inside > _RIM_LAYERS))
    best_unit, best_depth = _best_sweep(outer, vote, depth * unit, ties_to_guess=True)
    cut = _sweep_layer(outer, best_depth * best_unit) & part_mask
    beyond = _sweep_layer(outer, (best_depth + _FACE_WINDOW_PX) * best_unit) & ~cut
    if np.count_nonzero(beyond & ~part_mask) > _FACE_WINDOW_HOLE_SHARE * np.count_nonzero(beyond):
        return None  # the face's layers beyond lie across a hole: the step read there is the hole's
    face_level = float(np.median(level[interior]))
    if np.count_nonzero(cut & (level < face_level)) < _TINT_CUT_MIN_CORE * np.count_nonzero(cut):
        return None
    settled = _settled_cut(cut, part_mask)
    if settled is None:
        return None
    cut = _with_rim(settled[0], part_mask)
    keep = part_mask & ~cut
    rough = roughness(level)
    return ShadowCut(
        cut=cut,
        cut_px=int(np.count_nonzero(cut)),
        edge_px=_edge_px(cut, keep),
        texture_face=float(np.median(rough[interior])),
        texture_shadow=float(np.median(rough[cut])),
        level_face=float(np.median(level[keep])),
        level_shadow=float(np.median(level[cut])),
        direction=(float(best_unit[0]), float(best_unit[1])),
        length_px=float(best_depth),
    )


def _tint_step(
    outer8: np.ndarray, part_mask: np.ndarray, unit: np.ndarray, share: np.ndarray, stop: int
) -> float | None:
    """Where the layers a sweep of ``outer8`` along ``unit`` adds first hold the face's tint (:func:`tint_step_cut`).

    ``share`` is each pixel's tint as a share of the face's; a layer's is its median over the region's pixels
    (layers with fewer than :data:`~scanmass.segment.shadowlayer.STRETCH_PX` of them are passed over). The length
    (px) is where it crosses one half and stays past it for :data:`~scanmass.segment.shadowsweep._SUSTAIN` layers,
    interpolated between layers; None where it never does before ``stop``.
    """
    ks, prof = [], []
    for k, new in _new_layers(outer8, unit, stop):
        new = new & part_mask
        if np.count_nonzero(new) >= STRETCH_PX:
            ks.append(float(k))
            prof.append(float(np.median(share[new])))
    k_arr, p_arr = np.asarray(ks), np.asarray(prof)
    for i in range(len(k_arr)):
        if p_arr[i] >= 0.5 and np.median(p_arr[i : i + _SUSTAIN]) >= 0.5:
            return 0.0 if i == 0 else _crossing(k_arr, p_arr, i, 0.5)
    return None


#: Smallest shortening (px) of a sweep's cut by :func:`tint_bound`: the half-way of the tint and of the grain or
#: level read a pixel or so apart on the same step (the tint's smoothing, the grain's 1.5 px).
_TINT_BOUND_MIN_PX = 2.0
#: Smallest tint (median over the face) of a face of a colour of its own (brass), which :func:`tint_bound` leaves
#: alone: a thin one's cut is placed by its yellowness (:func:`~scanmass.segment.colourshadow.tint_cut`). The same
#: value as :data:`~scanmass.segment.castshadow._COLOUR_FACE_TINT` (brass 0.99, brushed steel in window light
#: 0.05-0.10 on the committed renders, tests/data/reallight).
_OWN_COLOUR_TINT = 0.3


def tint_bound(
    colour_lin: np.ndarray, part_mask: np.ndarray, paper_rgb: np.ndarray, cut: ShadowCut, reach_px: float
) -> ShadowCut | None:
    """A sweep's cut on a tinted metal face, shortened to the step of tint along its direction; None where it stands.

    A cast shadow keeps the paper's tint and a metal face mirroring the light (brushed steel in window light) has
    its own (:func:`tint_step_cut`). Where the face is that smooth that its rim near the outline reads as rough as
    the shadow (on the committed render tests/data/reallight/dev-lens-window-steel-t24 the 2.5 mm steel plate's face
    0.0015 against 0.03-0.2 in the 14 layers next to its outline), the sweep's grain runs on past the shadow into
    the face, whose level the shadow's core shares: the plate's own sweep was 11.7 px long where the paper's tint
    ends after 6-7 (the face's +0.05-0.07 beyond), and it cut the face beside its holes as well (-4.7 % in area).
    The cut is kept where it lies within the layers a sweep of the same direction up to the tint's step adds
    (:func:`_tint_step`, on the outer ring), where that is :data:`_TINT_BOUND_MIN_PX` or more shorter; beside the
    holes, within those of a sweep from their rims up to the step read on the holes' layers alone (a hole's wall
    facing the camera lies in its shadow's run), or as it was where none is read; pixels of the cut outside the
    region (the fade past the outline) stay. None where the face is not tinted (at least
    :data:`_DARK_CHROMA_STEP`) or is of a colour of its own (:data:`_OWN_COLOUR_TINT`), the cut has no sweep, no
    step is read, the side facing the light reads as long, or the paper 4-16 px past the outline beyond the cut
    is at :data:`_FADE_DIM` of the paper white or brighter (a hard light's shadow, ended on lit paper: its level's
    step against the face places its end; on the committed render tests/data/reallight/dev-spot-steel-t18 the
    2.2 mm steel seal under the spot went from -9.2 to +5.5 % in area shortened to its tint). The caller uses it on thin parts only: a thicker
    part's shaded side wall facing the camera mirrors the light as its face does, and its cut must take that wall
    with the shadow.
    """
    if cut.direction is None or cut.length_px is None:
        return None
    mask8 = part_mask.astype(np.uint8)
    q, tint, inside = _tint_reading(colour_lin, mask8, paper_rgb)
    interior = _face_interior(inside, reach_px) & ~cut.cut
    if np.count_nonzero(interior) < 50:
        return None
    face_tint = float(np.median(tint[interior]))
    if not _DARK_CHROMA_STEP <= abs(face_tint) < _OWN_COLOUR_TINT:
        return None
    unit = np.asarray(cut.direction, float)
    # a soft light's shadow (a window's) still dims the paper 4-16 px past the outline beyond the cut; a hard
    # light's shadow ends on the paper lit, its level's step against the face placing its end
    outside = cv2.distanceTransform((1 - mask8).astype(np.uint8), cv2.DIST_L2, 3)
    far = _swept_on(cut.cut & part_mask, part_mask, float(cut.length_px) * unit) & (outside > 4) & (outside < 16)
    level = q.mean(axis=2)
    if np.count_nonzero(far) < 20 or float(np.median(level[far])) >= _FADE_DIM:
        return None
    share = tint / face_tint
    outer = _filled(part_mask).astype(np.uint8)
    stop = int(cut.length_px) + _FACE_WINDOW_PX
    depth = _tint_step(outer, part_mask, unit, share, stop)
    lit = _tint_step(outer, part_mask, -unit, share, stop)
    if depth is None or depth > cut.length_px - _TINT_BOUND_MIN_PX or (lit is not None and lit >= depth):
        return None
    within = _sweep_layer(outer, max(depth, 1.0) * unit)
    # beside a hole the layers run from its rim: bounded by the step read on them alone (the hole's wall facing
    # the camera and its floor's shadow), or left as they were where none is read
    solid = (~(outer.astype(bool) & ~part_mask)).astype(np.uint8)  # all but the holes
    at_holes = _sweep_layer(solid, float(cut.length_px) * unit) & part_mask
    if at_holes.any():
        hole_depth = _tint_step(solid, part_mask, unit, share, stop)
        within |= at_holes if hole_depth is None else _sweep_layer(solid, max(hole_depth, 1.0) * unit)
    kept = (cut.cut & within) | (cut.cut & ~part_mask)
    settled = _settled_cut(kept & part_mask, part_mask)
    if settled is None:
        return None
    inner = _with_rim(settled[0], part_mask)
    keep = part_mask & ~inner
    return ShadowCut(
        cut=inner | (kept & ~part_mask),
        cut_px=int(np.count_nonzero(inner)),
        edge_px=_edge_px(inner, keep),
        texture_face=cut.texture_face,
        texture_shadow=cut.texture_shadow,
        level_face=float(np.median(level[keep])),
        level_shadow=float(np.median(level[inner])),
        direction=cut.direction,
        length_px=float(depth),
    )
