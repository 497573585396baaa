"""How much cast shadow can still hide inside a photo's found region where no shadow layer was cut.

Where :func:`scanmass.segment.castshadow.shadow_cut` cuts nothing, a shadow may still lie inside
the outline. Along each stretch of the outline the layers beside the edge tell how far in it can
reach: it ends before the first layers that look like the face (at the face's level, within
:data:`~scanmass.segment.castshadow._LEVEL_STEP_RATIO`, and smooth) for
:data:`~scanmass.segment.castshadow._SUSTAIN` layers. :func:`hidden_shadow` leaves open the
shadow-like pixels nearer the outline than that, for the cast-shadow term of the photo's checks.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import cv2
import numpy as np

from scanmass.segment.shadowlayer import _LEVEL_STEP_RATIO, STRETCH_PX, roughness
from scanmass.segment.shadowsweep import _SUSTAIN

__all__ = ["HiddenShadow", "hidden_shadow"]

#: Fewest pixels of one stretch at one depth for its layer to count.
_LAYER_MIN_PX = 3


@dataclass(frozen=True)
class HiddenShadow:
    """How much cast shadow can still hide inside a region where no shadow layer was cut (:func:`hidden_shadow`).

    Attributes
    ----------
    hidden : (H, W) bool ndarray
        Shadow-like pixels of the edge band (the paper's colour, darkened) that the evidence
        cannot exclude: along each stretch of the outline, those nearer the outline than the
        depth where the face begins.
    hidden_px : int
        Their count.
    flagged_px : int
        All shadow-like pixels of the edge band (the count colour alone leaves open).
    cleared_share : float
        Share of the flagged stretches (by their shadow-like pixels) where the face begins
        next to the edge.
    depth_px : float
        The largest depth (px) left open along a cleared stretch; ``reach_px`` where a
        stretch is not cleared.
    ring_depth_px : tuple of float
        Per ring given (outline, holes): the largest depth (px) left open along its own
        stretches that hold shadow-like pixels (``reach_px`` where one is not cleared); a
        hole's diameter can be narrowed by that much.
    """

    hidden: np.ndarray
    hidden_px: int
    flagged_px: int
    cleared_share: float
    depth_px: float
    ring_depth_px: tuple[float, ...] = ()


def _group_median(group: np.ndarray, values: np.ndarray, n_groups: int) -> tuple[np.ndarray, np.ndarray]:
    """Per group 0 .. n_groups - 1: the median of ``values`` (the lower middle one) and the count."""
    order = np.lexsort((values, group))
    g, v = group[order], values[order]
    count = np.bincount(g, minlength=n_groups)
    start = np.concatenate([[0], np.cumsum(count)[:-1]])
    mid = np.minimum(start + (count - 1) // 2, max(len(v) - 1, 0))
    med = np.where(count > 0, v[mid] if len(v) else 0.0, np.nan)
    return med, count


def hidden_shadow(
    colour_lin: np.ndarray,
    part_mask: np.ndarray,
    paper_rgb: np.ndarray,
    reach_px: float,
    code_step: np.ndarray | None = None,
    rings: list[np.ndarray] | None = None,
) -> HiddenShadow | None:
    """Bound the cast shadow that can hide inside a region whose edge band looks like darkened paper.

    Colour alone cannot tell a dark neutral face from a deep shadow, so every shadow-like
    pixel of the edge band (:func:`~scanmass.segment.shadow.darkened_paper`) is open. Where no
    shadow layer was cut (:func:`~scanmass.segment.castshadow.shadow_cut`), the layers beside the edge tell more: a shadow
    inside the outline lies between the part's edge and the outline, reached from the outline,
    and it is the paper in less light: at another level than the face, or grainier (the
    paper's grain and, in a dim shadow, the camera's noise against its low level). The boundary
    is cut into stretches (the outline pixels of one :data:`STRETCH_PX` grid cell, each pixel
    given to its nearest outline pixel); along each, the pixels at each whole-pixel depth form a
    layer, and a layer looks like the face when its median level is within
    :data:`_LEVEL_STEP_RATIO` of the face's (the step the cut needs to place itself) and its
    median roughness is below what the cut takes as shadow (twice the face's, or one code step
    at its level). Where the face begins at depth k (that layer and the next
    :data:`_SUSTAIN` - 1 present ones look like it), a shadow can only hide in the k layers
    nearer the outline (at least one: the outline's own pixel is mixed with the paper by blur);
    where it does not begin within ``reach_px``, the whole band stays open. What is left open is
    a shadow as dark and as smooth as the face, which nothing in one photo tells apart.

    Parameters
    ----------
    colour_lin, part_mask, paper_rgb, reach_px, code_step
        As for :func:`~scanmass.segment.castshadow.shadow_cut`.
    rings : list of (N, 2) ndarray, optional
        The region's rings (x, y crop px: the outline, then its holes), for ``ring_depth_px``.

    Returns
    -------
    HiddenShadow or None
        None when the region has no interior to take the face's level and grain from.

    Examples
    --------
    A smooth dark face (0.04 of the paper, 60 x 66 px) with no shadow: of its 12 px edge band
    (2448 px, all darkened paper by colour) only the outline's own pixel layer stays open. With
    a rough shadow layer 6 px wide along its left side, the face begins 9 px in there (the
    roughness is smoothed over 1.5 px): those 9 px stay open, covering the layer.

    >>> rng = np.random.default_rng(0)
    >>> paper = np.array([0.7, 0.72, 0.74]); img = np.tile(paper, (100, 100, 1))
    >>> mask = np.zeros((100, 100), bool); mask[20:80, 14:80] = True; img[mask] = 0.04 * paper
    >>> clean = hidden_shadow(img, mask, paper, reach_px=12)
    >>> clean.flagged_px, clean.hidden_px, clean.cleared_share, clean.depth_px
    (2448, 248, 1.0, 1.0)
    >>> img[20:80, 14:20] = paper * (0.01 + 0.06 * rng.random((60, 6, 1)))
    >>> shaded = hidden_shadow(img, mask, paper, reach_px=12)
    >>> bool(shaded.hidden[30:70, 14:20].all()), shaded.hidden[30:70, 14:27].sum(axis=1).min()
    (True, np.int64(9))
    """
    from scanmass.segment.shadow import darkened_paper

    mask8 = part_mask.astype(np.uint8)
    if mask8.sum() < 50 or mask8.all():
        return None
    paper = np.asarray(paper_rgb, np.float32)
    q = colour_lin.astype(np.float32) / paper
    level = q.mean(axis=2)
    rough = roughness(level)
    inside, nearest = cv2.distanceTransformWithLabels(mask8, cv2.DIST_L2, 5, labelType=cv2.DIST_LABEL_PIXEL)
    interior = inside > min(reach_px + 2.0, 0.75 * float(inside.max()))
    if np.count_nonzero(interior) < 50:
        return None
    tex_face = float(np.median(rough[interior]))
    face_level = float(np.median(level[interior]))
    floor = 0.01
    if code_step is not None:
        floor = max(floor, 0.5 * float(np.median(code_step[interior])) / max(face_level, 1e-6))
    rough_max = max(2.0 * tex_face, floor)
    # each pixel's stretch: the grid cell of its nearest outline (background) pixel
    zr, zc = np.nonzero(mask8 == 0)
    h, w = mask8.shape
    cols = (w + STRETCH_PX - 1) // STRETCH_PX
    cell_of_zero = (zr // STRETCH_PX) * cols + zc // STRETCH_PX
    n_cells = ((h + STRETCH_PX - 1) // STRETCH_PX) * cols
    n_layers = int(math.ceil(reach_px))
    band = part_mask & (inside <= reach_px)
    rows, cs = np.nonzero(band)
    cell = cell_of_zero[nearest[rows, cs] - 1]
    layer = np.minimum(np.ceil(inside[rows, cs]).astype(np.intp) - 1, n_layers - 1)
    key = cell * n_layers + layer
    lv, count = _group_median(key, level[rows, cs], n_cells * n_layers)
    rg, _ = _group_median(key, rough[rows, cs], n_cells * n_layers)
    present = (count >= _LAYER_MIN_PX).reshape(n_cells, n_layers)
    with np.errstate(invalid="ignore", divide="ignore"):
        ratio = np.maximum(lv, face_level) / np.maximum(np.minimum(lv, face_level), 1e-6)
    face = present & (ratio < _LEVEL_STEP_RATIO).reshape(present.shape) & (rg <= rough_max).reshape(present.shape)
    # per stretch, the first depth from which the present layers look like the face
    open_depth = np.full(n_cells, np.inf)
    used = np.unique(cell)
    testable = np.zeros(n_cells, bool)
    testable[used] = present[used].sum(axis=1) >= _SUSTAIN
    for c in used[testable[used]]:
        idx = np.flatnonzero(present[c])
        for j, k in enumerate(idx):
            nxt = idx[j : j + _SUSTAIN]
            if len(nxt) >= 2 and face[c, nxt].all():
                open_depth[c] = max(float(k), 1.0)
                break
    # a stretch too short to test (a few pixels where the grid cuts the outline) takes the
    # deepest open depth of the tested stretches beside it; none beside it: the whole band
    grid = open_depth.reshape(-1, cols)
    tested = testable.reshape(-1, cols)
    for c in used[~testable[used]]:
        r0, c0 = divmod(int(c), cols)
        near = grid[max(r0 - 1, 0) : r0 + 2, max(c0 - 1, 0) : c0 + 2][
            tested[max(r0 - 1, 0) : r0 + 2, max(c0 - 1, 0) : c0 + 2]
        ]
        open_depth[c] = float(near.max()) if near.size else np.inf
    like = darkened_paper(colour_lin.astype(np.float32), paper) & band
    like_cell = cell[like[rows, cs]]
    depth = open_depth[cell]
    ring_depth: list[float] = []
    if rings:
        # each ring's background piece (the paper around the part, or a hole): its stretches' deepest open depth
        _, piece = cv2.connectedComponents((mask8 == 0).astype(np.uint8), connectivity=4)
        piece_of = piece[zr, zc][nearest[rows, cs] - 1]
        for ring in rings:
            fill = np.zeros_like(mask8)
            cv2.fillPoly(fill, [np.round(ring).astype(np.int32)], 1)
            labels_in = piece[(fill > 0) & (mask8 == 0)]
            labels_in = labels_in[labels_in > 0]
            if labels_in.size == 0:
                ring_depth.append(float(reach_px))
                continue
            own = piece_of == np.bincount(labels_in).argmax()
            d = depth[own & like[rows, cs]]
            ring_depth.append(float(min(d.max(), reach_px)) if d.size else 0.0)
    hidden = np.zeros_like(part_mask)
    hidden[rows, cs] = like[rows, cs] & (inside[rows, cs] <= depth)
    n_like = int(np.count_nonzero(like))
    cleared = np.isfinite(open_depth[like_cell])
    finite = open_depth[np.isfinite(open_depth)]
    return HiddenShadow(
        hidden=hidden,
        hidden_px=int(np.count_nonzero(hidden)),
        flagged_px=n_like,
        cleared_share=float(np.mean(cleared)) if n_like else 1.0,
        depth_px=float(reach_px) if not cleared.all() else (float(finite.max()) if finite.size else 0.0),
        ring_depth_px=tuple(ring_depth),
    )
