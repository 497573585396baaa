"""Side walls of thick parts that a photo's segmentation left out: lit walls unlike the paper, or on the light's side.

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
paper lit less).

A band of the paper's chroma (a brushed-steel wall mirrors the lit paper in front of it) is
not told from a shadow by its colour. Its place is: a part's own cast shadow lies on its side
away from the light, so where the paper beyond the part's far side is darkened and the paper
beyond this side is lit (:class:`PaperShade`), a flat band one wall wide that steps up to the
paper is no shadow of the part. Such a band is read over the wall's width across the outline
(the parallax's component along the normal) and ends at its step up to the paper, the wall's
foot. Under diffuse light, or where the shadow lies inside the found outline, no side is known
to face the light and the band is left as found.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass

import cv2
import numpy as np

from scanmass.numeric import sample_points

__all__ = ["LostWall", "lost_wall_band", "paper_shade", "PaperShade", "WALL_MIN_PX", "WALL_MIN_CHROMA"]

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
#: Smallest mean darkening (against the lit paper round the part) of the paper beyond a part's
#: far side for :meth:`PaperShade.faces_light`: the part's own cast shadow lies there.
LIGHT_MIN_DEPTH = 0.2
#: Largest mean darkening of the paper beyond the stretch's own side for it to face the light.
LIGHT_MAX_LIT_DEPTH = 0.1
#: Cosine bounding the normals counted as the stretch's own side and as the far side (60 degrees).
LIGHT_FACING = 0.5
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
    seam : (H, W) bool ndarray or None
        Beside a neutral wall, the pixels just inside the outline that its found edge crosses
        (half face, half wall): to be painted with the band.
    """

    band: np.ndarray
    band_px: int
    vertices: int
    seam: np.ndarray | None = None


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
    """Bilinear samples of a (H, W) float image at (..., 2) points (x, y px).

    Laid out in rows by :func:`scanmass.numeric.sample_points`: ``cv2.remap`` refuses a
    destination of 32767 or more columns, which one column of every point of a long ring
    times its samples across can reach.
    """
    return sample_points(np.ascontiguousarray(img, np.float32), pts[..., 0], pts[..., 1], cv2.INTER_LINEAR)


@dataclass(frozen=True)
class PaperShade:
    """How dark the paper is beyond a part's silhouette, vertex by vertex (:func:`paper_shade`).

    Attributes
    ----------
    normal : (N, 2) ndarray
        Outward normals averaged over a stretch (unit, px).
    dark : (N,) ndarray
        The paper's darkening beyond each vertex: 1 - its level over the lit paper round the part.
    """

    normal: np.ndarray
    dark: np.ndarray

    def faces_light(self, normal: np.ndarray) -> bool:
        """Whether a stretch with this outward normal faces the light: the far side is in shadow, this side lit.

        A part's own cast shadow lies on its side away from the light. Where the paper beyond
        the part's far side (normals within 60 degrees of the opposite one) is darkened by
        :data:`LIGHT_MIN_DEPTH` or more on average and the paper beyond this side (normals within
        60 degrees of it) by at most :data:`LIGHT_MAX_LIT_DEPTH`, the light falls on this side, and
        a band beside it is not the part's shadow.
        """
        unit = np.asarray(normal, float) / max(float(np.hypot(*normal)), 1e-12)
        cos = self.normal @ unit
        far, near = cos < -LIGHT_FACING, cos > LIGHT_FACING
        if not far.any() or not near.any():
            return False
        return bool(self.dark[far].mean() >= LIGHT_MIN_DEPTH and self.dark[near].mean() <= LIGHT_MAX_LIT_DEPTH)


def paper_shade(
    level: np.ndarray, ring_px: np.ndarray, normal_px: np.ndarray, silhouette_px: np.ndarray, reach_px: float
) -> PaperShade | None:
    """The paper's darkening beyond a part's silhouette all round, for :meth:`PaperShade.faces_light`.

    The paper beyond the part's silhouette (``silhouette_px`` out from each vertex of the
    footprint's ring: the side wall facing the camera, or the top face's overhang on the far
    side) is read from 2 px to ``reach_px`` further out along the outward normal (averaged over
    a stretch: a cut's whole-pixel edge has vertex normals pointing into the part); its median
    against the lit paper round the part (the upper quartile of those readings) gives the
    darkening. None for a ring too short or a reach too small to read.
    """
    ring = np.asarray(ring_px, float)
    normal = np.asarray(normal_px, float)
    width = np.asarray(silhouette_px, float)
    if len(ring) < 2 * _STRETCH or reach_px < 3.0:
        return None
    k = _STRETCH
    padded = np.concatenate([normal[-(k // 2) :], normal, normal[: k - 1 - k // 2]])
    kernel = np.ones(k) / k
    normal = np.c_[np.convolve(padded[:, 0], kernel, "valid"), np.convolve(padded[:, 1], kernel, "valid")]
    normal /= np.maximum(np.hypot(normal[:, 0], normal[:, 1]), 1e-9)[:, None]
    offsets = np.arange(2.0, reach_px + 0.01, 1.0)
    pts = ring[:, None, :] + (width[:, None] + offsets[None, :])[..., None] * normal[:, None, :]
    beyond = np.median(_sample(level, pts), axis=1)
    lit = float(np.percentile(beyond, 75))
    if lit <= 1e-6:
        return None
    return PaperShade(normal=normal, dark=np.clip(1.0 - beyond / lit, 0.0, None))


def step_is_ramp(step: float, ramp: float) -> bool:
    """Whether a band's rise across itself (``ramp``) is too large against its step up to the paper for a flat wall."""
    return step <= _FLAT * ramp


def _band_levels(
    at: Callable[[np.ndarray, np.ndarray], float], level: np.ndarray, p: float
) -> tuple[float, float, float] | None:
    """A stretch's band (1.5 px to ``p`` - 1 out), paper (``p`` + 2 to + 5) and the band's rise; None unless it steps up.

    The band must lie a tenth of the paper's level or more below the paper and a tenth of the
    way from the face (2-4 px inside) to the paper or more above the face.
    """
    in_band, beyond = np.arange(1.5, p - 0.99, 0.5), np.arange(p + 2.0, p + 5.01, 0.5)
    if len(in_band) == 0:
        return None
    plate, paper = at(in_band, level), at(beyond, level)
    ramp = at(np.array([max(p - 1.0, 1.5)]), level) - at(np.array([1.5]), level)
    face = at(np.array([-2.0, -3.0, -4.0]), level)
    if not (paper - plate > WALL_MIN_STEP * paper and plate > face + 0.1 * (paper - face)):
        return None
    return plate, paper, ramp


def _neutral_foot(
    at: Callable[[np.ndarray, np.ndarray], float],
    level: np.ndarray,
    p: float,
    along: Callable[[np.ndarray, np.ndarray], np.ndarray] | None = None,
) -> float | None:
    """Where a neutral wall band of projected width ``p`` (px) ends: its step half-way up to the paper; None if it is no flat band.

    The band is read over the wall's width as the camera sees it across the outline (the
    parallax's component along the normal); it must step up to the paper (:func:`_band_levels`)
    and be flat (a contact shadow's fade is a ramp). Its outer edge, the wall's foot, is where the
    level first reaches half-way from the band to the paper, outwards from the band's middle.
    ``along`` (optional) gives ``at`` of each distance at once (the same values).
    """
    levels = _band_levels(at, level, p)
    if levels is None or step_is_ramp(levels[1] - levels[0], levels[2]):
        return None
    plate, paper, _ = levels
    d = np.arange(0.5 * p, p + 4.01, 0.25)
    prof = np.array([at(np.array([x]), level) for x in d]) if along is None else along(d, level)
    up = np.flatnonzero(prof >= 0.5 * (plate + paper))
    return float(d[up[0]]) if len(up) else None


def lost_wall_band(
    colour_lin: np.ndarray,
    ring_px: np.ndarray,
    normal_px: np.ndarray,
    wall_px: np.ndarray,
    *,
    shadow_reach_px: float | None = None,
    silhouette_px: np.ndarray | None = None,
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
    shadow_reach_px : float, optional
        Given, the test is the one for neutral bands instead: only bands of the paper's colour
        are tested, and taken as wall on the side the light falls on (:meth:`PaperShade.faces_light`,
        the paper read this far beyond the silhouette), over the wall's width across the
        outline (``silhouette_px``) and out to the band's step up to the paper (its foot).
    silhouette_px : (N,) ndarray, optional
        With ``shadow_reach_px``: how far (px) the part's silhouette reaches beyond each vertex
        along its normal (the parallax's component across the outline); ``wall_px`` if not given.

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
    across = width if silhouette_px is None else np.asarray(silhouette_px, float)
    shade = None if shadow_reach_px is None else paper_shade(level, ring, normal, across, shadow_reach_px)
    band = np.zeros(level.shape, np.uint8)
    seam = np.zeros(level.shape, np.uint8)
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

            def along(d: np.ndarray, img: np.ndarray, base: np.ndarray = base, nrm: np.ndarray = nrm) -> np.ndarray:
                # ``at`` of each distance, sampled at once: each sample depends on its own point only, and
                # each column's median is the one of its own values (float64, as ``at`` returns them)
                pts = base[:, None, :] + np.asarray(d, float)[None, :, None] * nrm[:, None, :]
                return np.median(_sample(img, pts), axis=0).astype(np.float64)

            def shares(d: np.ndarray, at: Callable[[np.ndarray, np.ndarray], float] = at) -> np.ndarray:
                rgb = np.array([at(d, c) for c in chans])
                return np.asarray(rgb / max(float(rgb.sum()), 1e-9))

            def chroma_of(q: float, shares: Callable[[np.ndarray], np.ndarray] = shares) -> float:
                s_band, s_paper = shares(np.arange(1.5, q - 0.99, 0.5)), shares(np.arange(q + 2.0, q + 5.01, 0.5))
                return float(np.abs(s_band - s_paper).max() / s_paper.max())

            levels = _band_levels(at, level, p)
            chroma = chroma_of(p) if levels is not None else 0.0
            reach = width
            if levels is not None and chroma >= WALL_MIN_CHROMA:
                if shadow_reach_px is not None:
                    continue  # a coloured band: the plain test's (called without a reach)
                plate, paper, ramp = levels
                s_band, s_paper = shares(np.arange(1.5, p - 0.99, 0.5)), shares(np.arange(p + 2.0, p + 5.01, 0.5))
                s_face = shares(np.array([-2.0, -3.0, -4.0]))
                if step_is_ramp(paper - plate, ramp) and not _face_coloured(s_band, s_face, s_paper, chroma):
                    continue  # a ramp up to the paper: a penumbra as much as a wall
            else:
                # the paper's colour: a shadow as much as a wall, unless the light falls on this side;
                # read over the wall's width across the outline
                q = max(float(np.median(across[idx])), WALL_MIN_PX)
                if shade is None or not shade.faces_light(nrm.mean(axis=0)) or chroma_of(q) >= WALL_MIN_CHROMA:
                    continue
                    continue
                foot = _neutral_foot(at, level, q, along)
                if foot is None:
                    continue
                reach = np.full(n, foot)
                # the pixels the found edge crosses, half face and half lit wall, would be left as a
                # light seam between the face and the painted wall: the strip 1 px inside goes with it
                for i in idx:
                    j = (i + 1) % n if (i + 1) % n in idx else i
                    strip = np.array([ring[i] - normal[i], ring[j] - normal[j], ring[j], ring[i]])
                    cv2.fillConvexPoly(seam, np.round(strip * 16).astype(np.int32), 1, lineType=cv2.LINE_8, shift=4)
            for i in idx:
                j = (i + 1) % n
                if j not in idx:
                    j = i
                quad = np.array([ring[i], ring[j], ring[j] + reach[j] * normal[j], ring[i] + reach[i] * normal[i]])
                cv2.fillConvexPoly(band, np.round(quad * 16).astype(np.int32), 1, lineType=cv2.LINE_8, shift=4)
            count += len(idx)
    if count == 0:
        return None
    mask = band.astype(bool)
    return LostWall(
        band=mask, band_px=int(np.count_nonzero(mask)), vertices=count, seam=seam.astype(bool) if seam.any() else None
    )
