"""Side walls of thick parts that a photo's segmentation left out: a lit wall of another colour than the paper.

A part of thickness t photographed from above at an angle shows, on its side towards the
camera's nadir, a band of side wall between its top face and the paper; the band is as wide as
the parallax of the top face (known from the plane map and the thickness). The pipeline takes
the outline there as the part's bottom edge. When the wall is lit and light (polished brass
facing a lamp), the segmentation may take it for paper: the outline then runs on the top face's
edge and the part measures too small by that band.

Such a band is told from the paper beyond it and from a cast shadow by three things, each
taken as a median over a stretch of the outline: it is flat (no ramp towards the paper, as a
penumbra has), it ends in a step up to the paper's level about one wall width out, and it
has a colour of its own (a shadow keeps the paper's chroma; common practice, it is the
paper lit less). A band of the paper's chroma (a neutral steel wall) is not told from a
shadow this way and is left as found.
"""

from __future__ import annotations

from dataclasses import dataclass

import cv2
import numpy as np

__all__ = ["LostWall", "lost_wall_band", "WALL_MIN_PX", "WALL_MIN_CHROMA"]

#: Narrowest wall band (px) looked for: below it the band is within the edge's blur.
WALL_MIN_PX = 2.5
#: Smallest chroma difference (largest channel share change over the largest share) between
#: the band and the paper beyond it for a wall; on the committed renders (tests/data/reallight)
#: shadow bands beside brass parts differ by 0.02-0.06 (one stretch 0.13), brass walls by 0.10-0.42.
WALL_MIN_CHROMA = 0.08
#: Smallest step from the band's level up to the paper's, as a share of the paper's level.
WALL_MIN_STEP = 0.1
#: Smallest ratio of the step (band to paper) to the rise across the band itself: a wall is
#: flat, a penumbra rises all the way. A linear ramp of any length beside a wall band 5 px or
#: wider gives at most 2.3; the brass disc of the renders (8.4 px wall) 2.5 and more. Below
#: about 4 px the band is too narrow for this test, and its colour alone tells it from a shadow.
_FLAT = 2.5
#: Smallest chroma difference (as :data:`WALL_MIN_CHROMA`) for a band that rises towards the paper
#: to be taken as wall all the same: a polished wall's highlight brightens it towards its lower
#: edge. Above every shadow band measured beside brass parts on the committed renders (at most
#: 0.13); the brass disc of tests/data/reallight/mixed-brass-t30 shows 0.28 on such a stretch.
WALL_RAMP_MIN_CHROMA = 0.2
#: Smallest share of the face's colour shift from the paper (projected) that such a band shows.
WALL_RAMP_MIN_LIKENESS = 0.25
#: Vertices per stretch tested as one (about 1 px apart); shorter end pieces under half are left out.
_STRETCH = 15


@dataclass(frozen=True)
class LostWall:
    """The side-wall band left out beside an outline (:func:`lost_wall_band`).

    Attributes
    ----------
    band : (H, W) bool ndarray
        The band's pixels (crop coordinates), outside the outline.
    band_px : int
        Their count.
    vertices : int
        Outline vertices whose stretch was taken as a lost wall.
    """

    band: np.ndarray
    band_px: int
    vertices: int


def _face_coloured(s_band: np.ndarray, s_face: np.ndarray, s_paper: np.ndarray, chroma: float) -> bool:
    """Whether a band's colour (channel shares) is shifted from the paper's the way the face's is, and strongly.

    A wall is of the part's material: its colour moves away from the paper's in the face's
    direction. Only a strongly coloured face (brass, copper) and band count. A shadow in
    coloured light keeps the paper's colour or moves it towards that light's (a bluish shade
    beside a warm lamp), not towards the part's.
    """
    towards = s_face - s_paper
    norm = float(np.dot(towards, towards))
    if chroma < WALL_RAMP_MIN_CHROMA or float(np.abs(towards).max() / s_paper.max()) < WALL_RAMP_MIN_CHROMA:
        return False  # the band or the face near the paper's colour (a neutral steel or black face)
    return float(np.dot(s_band - s_paper, towards)) / norm >= WALL_RAMP_MIN_LIKENESS


def _sample(img: np.ndarray, pts: np.ndarray) -> np.ndarray:
    """Bilinear samples of a (H, W) float image at (..., 2) points (x, y px)."""
    flat = pts.reshape(-1, 2).astype(np.float32)
    out = cv2.remap(
        np.ascontiguousarray(img, np.float32),
        np.ascontiguousarray(flat[:, :1]),
        np.ascontiguousarray(flat[:, 1:]),
        cv2.INTER_LINEAR,
        borderMode=cv2.BORDER_REPLICATE,
    )
    return out.reshape(pts.shape[:-1])


def lost_wall_band(
    colour_lin: np.ndarray, ring_px: np.ndarray, normal_px: np.ndarray, wall_px: np.ndarray
) -> LostWall | None:
    """The band of side wall outside an outline that looks unlike both the paper and a shadow.

    Parameters
    ----------
    colour_lin : (H, W, 3) float ndarray
        A crop of the photo in linear light.
    ring_px : (N, 2) ndarray
        The outline's vertices (crop px, x y), in order.
    normal_px : (N, 2) ndarray
        Unit outward normals at the vertices (px).
    wall_px : (N,) ndarray
        Width (px) of side wall the photo shows outside each vertex if the outline there runs on
        the top face's edge; 0 where no wall faces the camera.

    Returns
    -------
    LostWall or None
        None when no stretch of :data:`WALL_MIN_PX` or more is taken as a lost wall.

    Examples
    --------
    A dark face with a 5 px band of orange wall along its lower side, then bluish paper:

    >>> paper, wall = np.array([0.60, 0.62, 0.66]), np.array([0.50, 0.30, 0.10])
    >>> img = np.tile(paper, (60, 80, 1)); img[10:40, 10:70] = 0.05; img[40:45, 10:70] = wall
    >>> xs = np.arange(12.0, 68.0)
    >>> ring = np.c_[xs, np.full_like(xs, 39.5)]; normal = np.tile([0.0, 1.0], (len(xs), 1))
    >>> found = lost_wall_band(img, ring, normal, np.full(len(xs), 5.0))
    >>> found.vertices, bool(found.band[41:44, 20:60].all()), bool(found.band[46:, :].any())
    (56, True, False)
    """
    ring = np.asarray(ring_px, float)
    normal = np.asarray(normal_px, float)
    width = np.asarray(wall_px, float)
    level = colour_lin.mean(axis=2)
    chans = [colour_lin[..., k] for k in range(3)]
    on = width >= WALL_MIN_PX
    if not on.any():
        return None
    # runs of consecutive vertices with a wall (the ring is closed: start after a gap)
    n = len(ring)
    start = int(np.argmin(on)) if not on.all() else 0
    order = (np.arange(n) + start) % n
    runs: list[list[int]] = []
    for i in order:
        if on[i]:
            if not runs or runs[-1][-1] != (i - 1) % n:
                runs.append([])
            runs[-1].append(int(i))
    band = np.zeros(level.shape, np.uint8)
    count = 0
    for run in runs:
        for s0 in range(0, len(run), _STRETCH):
            idx = np.asarray(run[s0 : s0 + _STRETCH])
            if len(idx) < _STRETCH // 2:
                continue
            p = float(np.median(width[idx]))
            base, nrm = ring[idx], normal[idx]

            def at(d: np.ndarray, img: np.ndarray, base: np.ndarray = base, nrm: np.ndarray = nrm) -> float:
                pts = base[:, None, :] + np.asarray(d, float)[None, :, None] * nrm[:, None, :]
                return float(np.median(_sample(img, pts)))

            in_band = np.arange(1.5, p - 0.99, 0.5)
            beyond = np.arange(p + 2.0, p + 5.01, 0.5)
            plate, paper = at(in_band, level), at(beyond, level)
            ramp = at(np.array([max(p - 1.0, 1.5)]), level) - at(np.array([1.5]), level)
            face = at(np.array([-2.0, -3.0, -4.0]), level)
            step = paper - plate
            if not (step > WALL_MIN_STEP * paper and plate > face + 0.1 * (paper - face)):
                continue
            c_band = np.array([at(in_band, c) for c in chans])
            c_paper = np.array([at(beyond, c) for c in chans])
            c_face = np.array([at(np.array([-2.0, -3.0, -4.0]), c) for c in chans])
            s_band, s_paper = c_band / max(c_band.sum(), 1e-9), c_paper / max(c_paper.sum(), 1e-9)
            s_face = c_face / max(c_face.sum(), 1e-9)
            chroma = float(np.abs(s_band - s_paper).max() / s_paper.max())
            if chroma < WALL_MIN_CHROMA:
                continue  # the paper's colour: a shadow as much as a wall
            if step <= _FLAT * ramp and not _face_coloured(s_band, s_face, s_paper, chroma):
                continue  # a ramp up to the paper: a penumbra as much as a wall
            for i in idx:
                j = (i + 1) % n
                if j not in idx:
                    j = i
                quad = np.array([ring[i], ring[j], ring[j] + width[j] * normal[j], ring[i] + width[i] * normal[i]])
                cv2.fillConvexPoly(band, np.round(quad * 16).astype(np.int32), 1, lineType=cv2.LINE_8, shift=4)
            count += len(idx)
    if count == 0:
        return None
    mask = band.astype(bool)
    return LostWall(band=mask, band_px=int(np.count_nonzero(mask)), vertices=count)
