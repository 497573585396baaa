"""The sweep that adds a cast shadow's layer to a part's face: its direction, its length, and their refinement.

A prism's shadow from a distant light is its top face swept by one vector across the paper. The
direction is the one whose sweep adds shadow-like layers the longest (:func:`_run`); the length is
where the layers' level (or roughness) steps from the shadow's to the face's (:func:`_sweep_depth`,
:func:`_read_step`), bounded where the roughness' half-way reads JPEG coding's ringing
(:func:`_ringing_bound`); a search of nearby whole-pixel vectors by pixel votes refines both
(:func:`_best_sweep`). On a dark tinted face the sweep is chosen by votes over all directions
(:func:`_dark_sweep`). The decision whether the sweep's layer is cut is
:func:`scanmass.segment.castshadow.shadow_cut`'s.
"""

from __future__ import annotations

import math

import cv2
import numpy as np

from scanmass.segment.shadowlayer import _LEVEL_STEP_RATIO, STRETCH_PX, _new_layers, _sweep_layer

__all__ = ["LOW_LIGHT_REACH_FACTOR"]

#: How much longer than the 30-degree reach (:data:`~scanmass.segment.shadow.SHADOW_MIN_ELEVATION_DEG`) a
#: sweep may be where the photo's own shadow measures a lower light: tan(30 deg) / tan(15 deg) = 2.15, a
#: light down to 15 degrees above the mat (a window's middle; trigonometry). Such a sweep is taken only where
#: its layers are shadow-like without a break from the outline up to the step (:func:`_sweep_depth`'s run).
LOW_LIGHT_REACH_FACTOR = math.tan(math.radians(30.0)) / math.tan(math.radians(15.0))
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
    shadow can be (``reach_px``, or a lower light's measured run:
    :func:`~scanmass.segment.castshadow.shadow_cut`'s refusal), it is read again to the level of the
    layers next beyond them (up to 6 px), the face beside the shadow: a brushed face's dark sector there
    and its lit ones further on (tests/data/reallight/dev-spot-steel3-t20, the steel cam: the shadow at
    0.02 of the paper, the dark sector beside it 0.055-0.08, the lit ones 0.14; the half-way to 0.14 lay
    in the dark sector, 16.3 px against a reach of 10.5 px, and the cut was refused; to the sector
    beside it 8.9 px).
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
    level_step, face_sure, vote = _pixel_votes(level, rough, lv_s, lv_f, rg_s, rg_f)
    if level_step:
        profile, mid = (lv - lv_s) * np.sign(lv_f - lv_s), 0.5 * abs(lv_f - lv_s)
    else:
        profile, mid = rg_s - rg, 0.5 * (rg_s - rg_f)
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
            depth = _crossing(ks, profile, i, mid)
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
            return _crossing(ks, lv, i, mid)
    return None


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
    _, face_sure, vote = _pixel_votes(level, rough, lv_s, lv_f, rg_s, rg_f)
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


def _pixel_votes(
    level: np.ndarray, rough: np.ndarray, lv_s: float, lv_f: float, rg_s: float, rg_f: float
) -> tuple[bool, np.ndarray, np.ndarray]:
    """Each pixel's vote for the shadow (+1) or the face (-1), given the shadow's and the face's level and roughness.

    Where the two levels differ by :data:`_LEVEL_STEP_RATIO` or more (a level step), a pixel on the
    face's side of half-way votes for the face, a rough one at the shadow's level for the shadow,
    and a smooth one at the shadow's level (the shadow in the lee of a tall part's wall, or a dark
    face) not at all; without a step, a smooth pixel (under half-way between the two roughnesses)
    votes for the face and a rough one for the shadow. Shared by :func:`_read_step` and
    :func:`_dark_sweep`.

    Returns
    -------
    level_step : bool
        Whether the levels differ by a step.
    face_sure : (H, W) bool ndarray
        The pixels sure to be face: at the face's level and smooth (with a step), smooth (without).
    vote : (H, W) float32 ndarray
        +1, -1 or 0 per pixel.
    """
    smooth = rough <= 0.5 * (rg_s + rg_f)
    if max(lv_f, lv_s) >= _LEVEL_STEP_RATIO * max(min(lv_f, lv_s), 1e-6):
        at_face_level = (level - lv_s) * np.sign(lv_f - lv_s) >= 0.5 * abs(lv_f - lv_s)
        # smooth at the shadow's level: the shadow in the lee of a tall part's wall, or a dark
        # face; neither side's evidence
        vote = np.where(at_face_level, -1.0, np.where(smooth, 0.0, 1.0)).astype(np.float32)
        return True, at_face_level & smooth, vote
    return False, smooth, np.where(smooth, -1.0, 1.0).astype(np.float32)


def _crossing(ks: np.ndarray, profile: np.ndarray, i: int, mid: float) -> float:
    """Where ``profile`` crosses ``mid`` between layers ``i - 1`` and ``i`` (at sweep lengths ``ks``), linearly."""
    a, b = profile[i - 1], profile[i]
    frac = 0.0 if b <= a else float(np.clip((mid - a) / (b - a), 0.0, 1.0))
    return float(ks[i - 1] + frac * (ks[i] - ks[i - 1]))


def _best_sweep(
    mask8: np.ndarray, vote: np.ndarray, guess: np.ndarray, ties_to_guess: bool = False
) -> tuple[np.ndarray, float]:
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
            nearer = ties_to_guess and score == best_score and np.hypot(*(v - guess)) < np.hypot(*(best - guess))
            if score > best_score or nearer:
                best, best_score = v, score
    n = float(np.hypot(*best))
    return best / n, n
