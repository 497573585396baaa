"""A cast shadow the sweeps leave whole: the outline eroded back along the photo's light to the smooth face.

Under one light a part's cast shadow is its outline swept along the light's direction (on the mat; a
directional light, common practice of shadow geometry), so a region found as the top face and its shadow
together is, to within the wall's parallax, the face's outline swept by a segment along the light: the face
is that region eroded by the same segment. Where :func:`~scanmass.segment.castshadow.shadow_cut`'s sweep
stops short or is refused (a ring's crescent out of reach of its layer tests, a low window's shadow longer
than a light 30 degrees up casts), :func:`crescent_cut` erodes the region back along the direction another
part of the photo showed, one pixel at a time, while what each step takes is as grainy as a shadow (the
paper in less light is rough where the face is smooth), and stops where the step reaches the face's own
grain. Used by :mod:`scanmass.pipeline.photo_shadow_cut` as the last try along a known light. Where no part shows
the light, :func:`consistent_crescent_cut` tries the sweeps the paper's fall-off gives
(:mod:`~scanmass.segment.lightdir`), one per height of the light, and keeps the one whose length the grain agrees
with; :func:`severs_a_hole` tells a cut that (nearly) joins a hole to the outside, which no cast shadow's does.
"""

from __future__ import annotations

import math

import cv2
import numpy as np

from scanmass.segment.shadowlayer import (
    CUT_MIN_TEXTURE_RATIO,
    STRETCH_PX,
    ShadowCut,
    _edge_px,
    _filled,
    _new_layers,
    _settled_cut,
    _with_rim,
    roughness,
)
from scanmass.segment.shadowsweep import LOW_LIGHT_REACH_FACTOR

__all__ = ["crescent_cut", "consistent_crescent_cut", "severs_a_hole"]

#: Least roughness taken as a face's grain (a share of the level, as :func:`~scanmass.segment.shadowlayer.roughness`
#: gives it): below it a face's smoothness is the 8-bit coding's; the same floor as
#: :func:`~scanmass.segment.castshadow.shadow_cut`'s shadow-like test.
GRAIN_FLOOR = 0.01
#: Fewest pixels of the face (the layers past the stop) and of the shadow's core for their levels to be read.
FACE_MIN_PX = 50
#: Depth (px) from the outline within which a layer's roughness is damped by the paper beside it (the roughness's
#: 1.5 px blur takes in the bright paper, raising the level it is relative to): twice that blur.
RIM_PX = 3
#: Width (px) of the face a cut must leave between a hole and the outline for the hole to stay one when the region
#: is found again (the outline's blur and the cut's painted edge take about this much of a thin bridge).
BRIDGE_PX = 2
#: A layer before the roughest as smooth as the face is the face's own only where its level is under this many
#: times the face's: a brighter one is the paper in part of the light (a window's soft penumbra: on
#: dev-window-steel6-t22 the gasket's outer layers along the light read 0.19-0.47 of the paper, roughness
#: 0.06-0.11, its face 0.03-0.05), and the :data:`RIM_PX` layers past it are the core's blurred rim.
PENUMBRA_RATIO = 3.0


def crescent_cut(
    colour_lin: np.ndarray,
    part_mask: np.ndarray,
    paper_rgb: np.ndarray,
    reach_px: float,
    direction: np.ndarray,
) -> ShadowCut | None:
    """The region eroded back along the light while each step's layer is as grainy as a shadow.

    Parameters
    ----------
    colour_lin : (H, W, 3) float ndarray
        A crop of the photo in linear light.
    part_mask : (H, W) bool ndarray
        The found region (holes cleared), with paper all around it.
    paper_rgb : (3,) ndarray
        The local paper white (linear).
    reach_px : float
        How far (px) a shadow of the part reaches under a light 30 degrees up
        (:func:`~scanmass.segment.shadow.shadow_band_px`); the erosion goes on to
        :data:`~scanmass.segment.shadowsweep.LOW_LIGHT_REACH_FACTOR` times it (a light 15 degrees up).
    direction : (2,) ndarray
        The photo's shadow direction (x, y px; the shadow lies on its side), from another part's sweep.

    Returns
    -------
    ShadowCut or None
        The layers from the outline up to the first one, past the roughest, whose median roughness falls to
        the geometric mean of the roughest's and the face's grain (half-way on a log scale: the two differ by
        a factor, not a difference); the face's grain is the smoothest layer's past the roughest (at least
        :data:`GRAIN_FLOOR`). None where the roughest layer is under
        :data:`~scanmass.segment.shadowlayer.CUT_MIN_TEXTURE_RATIO` times the face's grain, a layer before the
        roughest and deeper than :data:`RIM_PX` is already at the stop's level (no shadow runs from the outline
        to the face without a break), no stop is found, the core (the layers from the roughest to the stop) or the
        face (the layers past the stop) holds under :data:`FACE_MIN_PX`, the core is no darker than that face
        (a shadow cast on the paper beside a part lit by the same light is lit by the room alone), or the cut
        breaks :func:`~scanmass.segment.shadowlayer._settled_cut`'s limits.

    Examples
    --------
    A smooth dark disc (0.05 of the paper) 60 px across whose shadow, the disc swept 20 px along +x, is rough
    and darker (0.01-0.04): found as one region, eroded back along +x. The whole shadow is cut, and a 1 px
    sliver of the disc's edge with it (the roughness's blur: the stop one layer late, within the cut's 2 px
    term); a band at the face's level, smooth, or one brighter than the face, is no shadow.

    >>> rng = np.random.default_rng(2)
    >>> paper = np.array([0.7, 0.72, 0.74]); img = np.tile(paper, (120, 140, 1))
    >>> yy, xx = np.mgrid[:120, :140]; disc = (xx - 50) ** 2 + (yy - 60) ** 2 <= 30**2
    >>> swept = disc.copy()
    >>> for s in range(1, 21):
    ...     swept[:, s:] |= disc[:, :-s]
    >>> shade = swept & ~disc; n = int(shade.sum())
    >>> img[shade] = paper * (0.01 + 0.03 * rng.random((n, 1))); img[disc] = 0.05 * paper
    >>> cut = crescent_cut(img, swept, paper, 12.0, np.array([1.0, 0.0]))
    >>> cut.length_px, int((shade & ~cut.cut).sum()), int((cut.cut & disc).sum())
    (21.0, 0, 73)
    >>> img[shade] = paper * 0.05 * (0.98 + 0.04 * rng.random((n, 1)))
    >>> crescent_cut(img, swept, paper, 12.0, np.array([1.0, 0.0])) is None
    True
    >>> img[shade] = paper * (0.06 + 0.24 * rng.random((n, 1)))
    >>> crescent_cut(img, swept, paper, 12.0, np.array([1.0, 0.0])) is None
    True
    """
    unit = np.asarray(direction, float)
    unit = unit / max(float(np.hypot(unit[0], unit[1])), 1e-9)
    paper = np.asarray(paper_rgb, np.float32)
    level = (colour_lin.astype(np.float32) / paper).mean(axis=2)
    rough = roughness(level)
    filled8 = _filled(part_mask).astype(np.uint8)
    stop = int(math.ceil(LOW_LIGHT_REACH_FACTOR * reach_px)) + 2
    layers: list[tuple[int, np.ndarray, float]] = []
    for k, new in _new_layers(filled8, unit, stop):
        new = new & part_mask
        if np.count_nonzero(new) >= STRETCH_PX:
            layers.append((k, new, float(np.median(rough[new]))))
    if not layers:
        return None
    peak = max(range(len(layers)), key=lambda i: layers[i][2])
    shadow_grain = layers[peak][2]
    # the face's grain: the smoothest step past the shadow's roughest (what the erosion leaves holds a hole's
    # rough rim and shade, no face's grain)
    grain = max(min((r for _, _, r in layers[peak + 1 :]), default=shadow_grain), GRAIN_FLOOR)
    if shadow_grain < CUT_MIN_TEXTURE_RATIO * grain:
        return None
    half = math.sqrt(shadow_grain * grain)
    end = next((i for i in range(peak + 1, len(layers)) if layers[i][2] <= half), None)
    if end is None:
        return None  # no face reached within a low light's shadow
    # the paper in part of the light (a soft light's penumbra: smooth, far brighter than the face) before the
    # shadow's core is no face; the core's rim is then blurred against it as against the paper beyond the outline
    face_level = float(np.median(level[np.logical_or.reduce([new for _, new, _ in layers[end:]])]))
    lit = [float(np.median(level[new])) >= PENUMBRA_RATIO * face_level for _, new, _ in layers[:peak]]
    rim = max([RIM_PX] + [k + RIM_PX for (k, _, _), bright in zip(layers[:peak], lit) if bright])
    if any(r <= half and not bright for (k, _, r), bright in zip(layers[:peak], lit) if k > rim):
        return None  # the face's grain before the shadow's: no shadow running from the outline to the face
    cut = np.zeros(part_mask.shape, bool)
    for _, new, _ in layers[:end]:
        cut |= new
    face = np.zeros(part_mask.shape, bool)
    for _, new, _ in layers[end:]:
        face |= new
    core = np.zeros(part_mask.shape, bool)  # the shadow's core: from its roughest layer on to the face
    for _, new, _ in layers[peak:end]:
        core |= new
    if np.count_nonzero(face) < FACE_MIN_PX or np.count_nonzero(core) < FACE_MIN_PX:
        return None
    if float(np.median(level[core])) >= float(np.median(level[face])):
        return None  # no darker than the face: no shadow on the paper beside a part in the same light
    settled = _settled_cut(cut, part_mask)
    if settled is None:
        return None
    cut = _with_rim(settled[0], part_mask)
    keep = part_mask & ~cut
    return ShadowCut(
        cut=cut,
        cut_px=int(np.count_nonzero(cut)),
        edge_px=_edge_px(cut, keep),
        texture_face=grain,
        texture_shadow=float(np.median(rough[cut])),
        level_face=float(np.median(level[keep])),
        level_shadow=float(np.median(level[cut])),
        direction=(float(unit[0]), float(unit[1])),
        length_px=float(layers[end][0] - 1),
    )


def consistent_crescent_cut(
    colour_lin: np.ndarray,
    part_mask: np.ndarray,
    paper_rgb: np.ndarray,
    reach_px: float,
    vectors_px: list[np.ndarray],
) -> ShadowCut | None:
    """The :func:`crescent_cut` along the one of several candidate sweeps whose length it finds as its own.

    Where only the light's side is known (the paper's fall-off, :mod:`~scanmass.segment.lightdir`), not its
    height, the sweep that takes the shadow off the face seen in the photo is not the shadow's own vector: the
    top face is seen shifted from its footprint by its parallax, so the region is the face swept by the shadow
    less that shift, whose direction turns with the shadow's length. The caller gives one candidate vector
    (x, y px) per height of the light; each is eroded along its direction, and the cut kept is the one whose
    length (where the roughness falls to the face's) lies nearest the candidate's own length: the height at
    which the shadow's grain and the geometry agree. None where no candidate gives a cut.

    Examples
    --------
    The disc of :func:`crescent_cut`'s example, its shadow 20 px along +x: of three candidates the one 20 px
    long is kept (the others' directions leave the shadow's grain short of their length or past it).

    >>> rng = np.random.default_rng(2)
    >>> paper = np.array([0.7, 0.72, 0.74]); img = np.tile(paper, (120, 140, 1))
    >>> yy, xx = np.mgrid[:120, :140]; disc = (xx - 50) ** 2 + (yy - 60) ** 2 <= 30**2
    >>> swept = disc.copy()
    >>> for s in range(1, 21):
    ...     swept[:, s:] |= disc[:, :-s]
    >>> shade = swept & ~disc; n = int(shade.sum())
    >>> img[shade] = paper * (0.01 + 0.03 * rng.random((n, 1))); img[disc] = 0.05 * paper
    >>> cands = [np.array([40.0, 6.0]), np.array([20.0, 0.0]), np.array([8.0, -4.0])]
    >>> cut = consistent_crescent_cut(img, swept, paper, 12.0, cands)
    >>> cut.direction, cut.length_px
    ((1.0, 0.0), 21.0)
    >>> consistent_crescent_cut(img, swept, paper, 12.0, []) is None
    True
    """
    best: tuple[float, ShadowCut] | None = None
    for vec in vectors_px:
        length = float(np.hypot(vec[0], vec[1]))
        if length <= 0.0:
            continue
        cut = crescent_cut(colour_lin, part_mask, paper_rgb, reach_px, vec / length)
        if cut is None or cut.length_px is None:
            continue
        miss = abs(cut.length_px - length)
        if best is None or miss < best[0]:
            best = (miss, cut)
    return None if best is None else best[1]


def _enclosed(region: np.ndarray) -> int:
    """How many holes ``region`` holds: 4-connected pieces of its background that do not reach the border."""
    n, labels = cv2.connectedComponents((~region).astype(np.uint8), connectivity=4)
    edge = np.unique(np.concatenate([labels[0], labels[-1], labels[:, 0], labels[:, -1]]))
    return int(n - 1 - np.count_nonzero(edge))


def severs_a_hole(part_mask: np.ndarray, cut: np.ndarray) -> bool:
    """Whether a cut leaves less than :data:`BRIDGE_PX` of face between one of the region's holes and the outside.

    A cast shadow lies outside the face, so its cut never joins a hole of the face to the paper beyond; a cut
    that (nearly) does has taken a stretch of the face (a bore's shaded rim and the face beside it). Read as the
    region less the cut, eroded by :data:`BRIDGE_PX`, holding fewer holes than the region.

    Examples
    --------
    >>> yy, xx = np.mgrid[:80, :80]; r = np.hypot(xx - 40, yy - 40)
    >>> ring = (r <= 30) & (r > 15)
    >>> severs_a_hole(ring, (r > 26) & (xx < 40))  # the outer 4 px of one side: the ring stays whole
    False
    >>> severs_a_hole(ring, (r > 16) & (abs(yy - 40) < 3) & (xx > 40))  # across the ring but for 1 px
    True
    """
    kept = part_mask & ~cut
    k = 2 * BRIDGE_PX + 1
    eroded = cv2.erode(kept.astype(np.uint8), np.ones((k, k), np.uint8)).astype(bool)
    return _enclosed(eroded) < _enclosed(part_mask)
