"""What the cast-shadow cuts share: the cut found, the grain, the layers a sweep adds, and a cut settled in its region.

A cut is a :class:`ShadowCut`. The grain of a level map is its :func:`roughness` (the smoothed
deviation from a 3x3 median, relative to the local level). A sweep of a region by a vector adds
one layer per pixel of its length (:func:`_sweep_layer`, :func:`_new_layers`, the segment's
kernel :func:`_line_kernel`). A cut is settled in its region: the pieces it parts from the face go
with it and its limits are checked (:func:`_settled_cut`), the rim it would leave between itself
and the paper is taken with it (:func:`_with_rim`), and on a tinted matte face the pixels at the
face's level it took are given back (:func:`_face_given_back`). Also the region with its holes
filled (:func:`_filled`), the pieces of a pixel set reached from the region's boundary
(:func:`_reached`), a colour's tint against the paper (:func:`_tint`) and the constants the cuts
share. Used by :mod:`scanmass.segment.castshadow` (which re-exports the names callers import from
it), :mod:`~scanmass.segment.shadowsweep`, :mod:`~scanmass.segment.softshadow`,
:mod:`~scanmass.segment.darkface` and :mod:`~scanmass.segment.colourshadow`.
"""

from __future__ import annotations

from collections.abc import Iterator
from dataclasses import dataclass

import cv2
import numpy as np

__all__ = [
    "ShadowCut",
    "roughness",
    "STRETCH_PX",
    "CUT_MIN_TEXTURE_RATIO",
    "CUT_MAX_SHARE",
]

#: Smallest ratio of the shadow's roughness (median over the candidate layer) to the face's
#: (median over its interior) for a cut: below it the two cannot be told apart.
CUT_MIN_TEXTURE_RATIO = 4.0
#: Largest share of a part's pixels a cut may remove (more: not a shadow beside a part).
CUT_MAX_SHARE = 0.5
#: Side (px) of the grid cells that group a region's boundary into stretches for
#: :func:`scanmass.segment.hiddenshadow.hidden_shadow`: each stretch holds about this much of the
#: outline; also the fewest pixels a cut or a sweep's votes count for.
STRETCH_PX = 8
#: Darkening factor (level / paper) above which a pixel is not taken as shadow.
_MAX_DEPTH = 0.85
#: Smallest ratio of the face's level to the shadow's (or back) for the level step to place
#: the cut; below it the half-way fall of the roughness places it.
_LEVEL_STEP_RATIO = 1.3


@dataclass(frozen=True)
class ShadowCut:
    """The shadow layer found inside one region (:func:`~scanmass.segment.castshadow.shadow_cut`).

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
        was not found by a sweep (:func:`~scanmass.segment.softshadow.fade_cut`).
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


def _tint(smooth: np.ndarray, level: np.ndarray) -> np.ndarray:
    """Blue minus red over the level, per pixel, of colours taken over the paper white (the paper's 0)."""
    return np.asarray((smooth[..., 2] - smooth[..., 0]) / np.maximum(level, 1e-6))


def _reached(like: np.ndarray, part_mask: np.ndarray, inside: np.ndarray) -> np.ndarray:
    """The pieces of ``like`` reached from the region's boundary (a pixel within 1.5 px of it)."""
    count, labels = cv2.connectedComponents(like.astype(np.uint8), connectivity=8)
    touching = np.unique(labels[part_mask & (inside <= 1.5) & like])
    return np.isin(labels, touching[touching > 0])


def _filled(part_mask: np.ndarray) -> np.ndarray:
    """The region with its holes filled (the pixels its outer boundary encloses)."""
    mask8 = part_mask.astype(np.uint8)
    contours, _ = cv2.findContours(mask8, cv2.RETR_EXTERNAL, cv2.CHAIN_APPROX_NONE)
    out = np.zeros_like(mask8)
    cv2.drawContours(out, contours, -1, 1, thickness=cv2.FILLED)
    return out.astype(bool) | part_mask


def _face_interior(inside: np.ndarray, reach_px: float) -> np.ndarray:
    """(H, W) bool: a region's face, by the distance ``inside`` its pixels lie from the region's boundary.

    Deeper than a shadow reaches (``reach_px`` + 2 px), or, in a part too narrow for that, its
    deepest quarter (deeper than 0.75 of the largest distance).
    """
    return inside > min(reach_px + 2.0, 0.75 * float(inside.max()))


def _with_small_pieces(cut: np.ndarray, part_mask: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """``cut`` with the pieces of the rest it parts off under 5 % of the rest's largest, and the rest."""
    keep = part_mask & ~cut
    count, labels, stats, _ = cv2.connectedComponentsWithStats(keep.astype(np.uint8), connectivity=8)
    if count > 2:
        areas = stats[1:, cv2.CC_STAT_AREA]
        pieces = (labels > 0) & (stats[labels, cv2.CC_STAT_AREA] < 0.05 * areas.max())
        cut, keep = cut | pieces, keep & ~pieces
    return cut, keep


def _edge_px(cut: np.ndarray, keep: np.ndarray) -> float:
    """Length (px) of the boundary between a cut and what is kept: the kept pixels 4-adjacent to the cut."""
    k4 = np.array([[0, 1, 0], [1, 1, 1], [0, 1, 0]], np.uint8)
    return float(np.count_nonzero(keep & cv2.dilate(cut.astype(np.uint8), k4).astype(bool)))


def _settled_cut(cut: np.ndarray, part_mask: np.ndarray) -> tuple[np.ndarray, np.ndarray] | None:
    """The cut with the pieces it parts from the face, and what is kept; None past the cut's limits.

    Pieces of the rest under 5 % of its largest (a wall's strip, a rim between two shadows, a
    shadow's island) go with the cut. A cut that is empty, takes more than
    :data:`CUT_MAX_SHARE` of the region or leaves under 50 px is no cut (None).
    """
    cut, keep = _with_small_pieces(cut, part_mask)
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
    (used on tinted matte faces, :func:`~scanmass.segment.darkface._tinted_face_alike`; the shadow's
    level is read off the blur to the paper as well). A cut holding more than
    :data:`_GIVE_BACK_DARK_SHARE` of pixels darker than the face (a single light's core, whose fade out
    to the paper alone is brighter: the black gasket of tests/data/reallight/dev-window-black-t20, its
    shadow's core 0.4-0.6 of the face's level) stays as it is. On the render
    tests/data/reallight/dev-mixed-black3-t17 the black cam's cut (face at 0.046 of the paper white, its
    warm shadow 0.07-0.44) held 3-5 px of face along the shadow side (-6.3 % in area; now -0.6 %); where
    the shadow is darker than the face (a single light) a shadow's grain could reach above half-way, and
    the cut stays as it is.

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
    cut, keep = _with_small_pieces(cut, part_mask)
    to_cut = cv2.distanceTransform((~cut).astype(np.uint8), cv2.DIST_L2, 3)
    to_out = cv2.distanceTransform(part_mask.astype(np.uint8), cv2.DIST_L2, 3)
    strip = keep & (to_cut <= 2.0) & (to_out <= 2.0)
    strip &= ~cv2.dilate((keep & ~strip & (to_cut > 2.0)).astype(np.uint8), np.ones((3, 3), np.uint8)).astype(bool)
    before = cv2.connectedComponents(keep.astype(np.uint8), connectivity=8)[0]
    if strip.any() and cv2.connectedComponents((keep & ~strip).astype(np.uint8), connectivity=8)[0] <= before:
        cut = cut | strip
    return cut


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
