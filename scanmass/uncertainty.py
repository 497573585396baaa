"""The error model: standard uncertainties (1 sigma) of a part's figures.

Three independent terms, each kept separately in the result (DESIGN.md):

edge
    Noise moves each boundary sample along its normal, independently over a correlation
    length of one pixel: ``sigma_n = (noise / contrast) / |grad|`` px at each vertex,
    where ``|grad|`` is the gradient of the normalised (0 = background, 1 = part) image.
threshold
    One shared offset ``d`` of the whole boundary, from the uncertainty of the local
    background and part levels (a level error ``delta`` of the contrast moves a blurred
    edge by ``sqrt(2 pi) sigma_blur delta`` px: the levels' fit, their rounding to the
    stored grey levels and the blur tails their samples carry), plus the shared asymmetry
    of the edge profile (see *model*). There is no constant floor: each part of the shared
    offset is measured on the image or derived.
scale
    The relative uncertainty of the pixel-to-mm map, or the spread of the figures over
    sampled maps when the scale source provides them (a fitted homography).
model
    The model-error floor: what the edge model leaves out, so that noise-free images are
    covered too (:func:`model_uncertainty`):

    - *edge-model residual* (:func:`scanmass.segment.thin.edge_residual_px`): the image
      is sampled along the normal at every vertex and compared with the blurred straight
      edge through it; what the ring's vertices share (the blur's shape) is removed, the
      rest is projected onto the profile of a displacement (even about the edge: a wrong
      width is odd and moves nothing) and its variance density, correlations up to 8 px
      included (JPEG's DCT block, ITU-T T.81), less that of the same stencil out in the
      flat background (the noise alone) and of the crossing's own noise (the edge term),
      is a per-vertex displacement over an 8 px correlation length. It holds the
      interpolation error against the pixel phase, JPEG's block quantisation and a
      corner's misfit; where the levels either side are not flat (corners, narrow
      features) it is taken as shared along the boundary, like the wall term below.
      Where it is not measured, the modelled interpolation residual stands in for it:
      the boundary point is where the
      cubic interpolant (Keys, ``a = -0.75`` as OpenCV's ``INTER_CUBIC``) of the sampled
      edge crosses the level. For a pixel-integrated Gaussian edge of Gaussian-equivalent
      sigma ``s`` this crossing errs periodically with the edge's sub-pixel phase; its RMS
      over the phase, :func:`interpolation_residual_px`, is computed from that model
      (1-D, exact box integration of the Gaussian edge, 32 phases; about 0.018 px at
      s = 0.5, 0.011 at 0.8, 0.019 at 1.0, 0.028 at 1.5). Along an edge at angle ``t``
      to the nearest pixel axis the phase runs through a cycle every ``1 / |sin t|`` px,
      which is taken as the correlation length (capped at 10 px: near an axis the phase of a curved edge is stationary over about sqrt(R) px, 10 px at R = 100 px), so an axis-aligned
      edge gets an almost shared error;
    - *profile asymmetry*: a blur in linear light is point-symmetric about the edge; what
      the outer ring's profiles share beyond that (their median displacement from the
      crossing, the curvature step added back, less its own noise), as left by processing
      in the encoded domain (JPEG's quantisation of sRGB values, a tone curve applied after
      the blur), is a shared offset and joins the threshold term;
    - *grey-level quantisation*: at the edge, rounding to the stored grey levels adds an
      error uniform over one step ``D`` of the tone curve (sigma ``D / sqrt 12``,
      Widrow [3]_) to each pixel; where the image noise measured on flat regions is below
      that (noise-free images, whose flat regions round to one value) the difference is
      added as per-vertex noise. The local levels are means of quantised values, whose
      bias is ``D / sqrt 12`` without noise and decays as ``exp(-2 pi^2 s_n^2 / D^2)``
      with noise ``s_n`` (the first term of the quantisation theorem's characteristic
      function [3]_); it enters the shared offset;
    - *thin walls*: where the segment stage corrected or could not resolve a wall or slot
      (:mod:`scanmass.segment.thin`), a per-vertex offset covering the correction's
      uncertainty (or its whole size when unresolved).

The threshold term treats the level error as a smooth field, not one constant: the local
levels are least-squares surfaces (up to quadratic) fitted over ``n`` samples, so their
error is a combination of 6 modes (1, x, y, x^2, xy, y^2, orthonormalised over the
boundary), each of variance ``sigma^2 / n``; the segment stage reports the pointwise
variance ``6 sigma^2 / n`` (``level_rel_u``). An error ``db`` of the background and ``df``
of the part level moves the midpoint by ``(db + df) / 2``, i.e. the normalised value at
the edge by ``(db + df) / (2 c)``. The constant mode moves the whole boundary (area); the
tilts move it unevenly (centroid, product moment).

The perimeter is not a domain integral: besides a uniform offset (``2 pi d`` per ring in
the threshold term) it is biased by the boundary's shape, in two terms of its own, each
the bias's estimated size taken as a 1-sigma term (both measured against shapely on
rendered scans, see :data:`CORNER_RADIUS_SIGMA` and :data:`WIGGLE_RATIO`):

corners
    The blur rounds every corner; the traced contour follows a fillet of radius about
    the blur and is shorter (:func:`corner_deficit_mm`). A smooth outline gets almost
    nothing.
roughness
    Noise and the sampling of sharp edges leave wiggles along the traced ring, which make
    it longer (:func:`roughness_mm` from the noise model, or the ring's own measured
    zig-zag, :func:`wiggle_excess_mm`, whichever is larger).

Every figure F is linearised as ``dF = sum_k w_F(k) dn_k l_k`` over boundary vertices k
with normal displacement ``dn_k`` and attributed boundary length ``l_k``: ``w = 1`` for
the area, ``(x - xc) / A`` for the centroid, ``(y - yc)^2`` for Ixx, and so on (the
first-order shape derivative of a domain integral).

References
----------
.. [1] JCGM 100:2008, Evaluation of measurement data - Guide to the expression of
   uncertainty in measurement (GUM), sections 5.1 (law of propagation) and 5.2.
.. [2] J. Sokolowski and J.-P. Zolesio, Introduction to Shape Optimization, Springer 1992
   (shape derivative of a domain integral: d/dt int_Omega f = int_dOmega f V.n ds).
.. [3] B. Widrow and I. Kollar, Quantization Noise, Cambridge University Press 2008,
   chapters 4-5 (uniform quantisation noise D^2 / 12; the quantisation theorem).
.. [4] R. Keys, "Cubic convolution interpolation for digital image processing", IEEE
   Trans. ASSP 29(6), 1153-1160, 1981 (the interpolation kernel).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import numpy as np

from scanmass.geometry import signed_area
from scanmass.numeric import combine
from scanmass.section import boundary_influence

__all__ = [
    "EdgeModel",
    "build_edge_model",
    "edge_sigma_mm",
    "combine",
    "corner_deficit_mm",
    "roughness_mm",
    "wiggle_excess_mm",
    "figure_weights",
    "interpolation_residual_px",
    "level_modes",
    "model_uncertainty",
    "threshold_uncertainty",
    "part_uncertainty",
    "removed_material",
    "ring_mean_offset_u",
]

#: Correlation length of edge noise along the boundary, in pixels.
CORRELATION_PX = 1.0


@dataclass(frozen=True)
class EdgeModel:
    """Per-ring boundary description in mm used by the error model."""

    points_mm: np.ndarray  # (M, 2) all vertices of all rings
    normals: np.ndarray  # (M, 2) unit normals pointing away from the material
    lengths_mm: np.ndarray  # (M,) boundary length attributed to each vertex
    ring: np.ndarray  # (M,) ring index: 0 = outer, 1.. = holes
    sigma_n_mm: np.ndarray  # (M,) 1-sigma normal displacement of each vertex from noise
    corr_mm: np.ndarray  # (M,) correlation length of the noise at each vertex, mm
    offset_mm: float  # 1-sigma shared offset of the whole boundary


def build_edge_model(
    outer_mm: np.ndarray,
    holes_mm: list[np.ndarray],
    sigma_n_px: list[np.ndarray],
    mm_per_px: list[np.ndarray],
    offset_mm: float,
) -> EdgeModel:
    """Assemble the per-vertex description of all rings of one part.

    ``sigma_n_px[i]`` and ``mm_per_px[i]`` give, per vertex of ring i (0 = outer), the
    noise displacement in pixels and the local pixel size in mm. Normals and attributed
    lengths come from :func:`scanmass.section.boundary_influence`; each ring is first put
    in its orientation (outer counter-clockwise, holes clockwise), its per-vertex values
    with it, so that the vertices keep their order there.
    """
    rings, sig, corr = _oriented(outer_mm, holes_mm, sigma_n_px, mm_per_px)
    bi = boundary_influence(rings[0], rings[1:])
    return EdgeModel(
        bi["points"],
        bi["normals"],
        bi["lengths"],
        bi["ring"],
        np.concatenate(sig),
        np.concatenate(corr),
        float(offset_mm),
    )


def edge_sigma_mm(
    outer_mm: np.ndarray, holes_mm: list[np.ndarray], sigma_n_px: list[np.ndarray], mm_per_px: list[np.ndarray]
) -> np.ndarray:
    """``build_edge_model(...).sigma_n_mm`` alone: per-vertex displacements in mm, in the model's vertex order.

    For a second set of per-vertex values on rings whose model is already built (the
    same values, without the rings' normals and lengths again).
    """
    return np.concatenate(_oriented(outer_mm, holes_mm, sigma_n_px, mm_per_px)[1])


def _oriented(
    outer_mm: np.ndarray, holes_mm: list[np.ndarray], sigma_n_px: list[np.ndarray], mm_per_px: list[np.ndarray]
) -> tuple[list[np.ndarray], list[np.ndarray], list[np.ndarray]]:
    """Each ring in its orientation (outer counter-clockwise, holes clockwise), with its per-vertex sigma and correlation (mm)."""
    rings, sig, corr = [], [], []
    for i, ring in enumerate([outer_mm] + list(holes_mm)):
        ring = np.asarray(ring, float)
        s_px = np.broadcast_to(np.asarray(sigma_n_px[i], float), len(ring))
        scale = np.broadcast_to(np.asarray(mm_per_px[i], float), len(ring))
        if (signed_area(ring) > 0) != (i == 0):
            ring, s_px, scale = ring[::-1], s_px[::-1], scale[::-1]
        rings.append(ring)
        sig.append(s_px * scale)
        corr.append(CORRELATION_PX * scale)
    return rings, sig, corr


def figure_weights(
    model: EdgeModel, area_mm2: float, centroid_mm: tuple[float, float], ixx: float, iyy: float, ixy: float
) -> dict[str, np.ndarray]:
    """Shape-derivative weights of each figure with respect to normal boundary motion."""
    dx = model.points_mm[:, 0] - centroid_mm[0]
    dy = model.points_mm[:, 1] - centroid_mm[1]
    w = {
        "area_mm2": np.ones_like(dx),
        "centroid_x_mm": dx / area_mm2,
        "centroid_y_mm": dy / area_mm2,
        "ixx_mm4": dy * dy,
        "iyy_mm4": dx * dx,
        "ixy_mm4": dx * dy,
    }
    w["polar_mm4"] = w["ixx_mm4"] + w["iyy_mm4"]
    half_diff = 0.5 * (ixx - iyy)
    radius = math.hypot(half_diff, ixy)
    mean_w = 0.5 * (w["ixx_mm4"] + w["iyy_mm4"])
    if radius > 1e-12 * max(abs(ixx) + abs(iyy), 1e-300):
        dr = (half_diff * 0.5 * (w["ixx_mm4"] - w["iyy_mm4"]) + ixy * w["ixy_mm4"]) / radius
        w["i1_mm4"] = mean_w + dr
        w["i2_mm4"] = mean_w - dr
        a, b = ixx - iyy, -2.0 * ixy
        w["principal_angle_deg"] = np.degrees(
            0.5 * (a * (-2.0 * w["ixy_mm4"]) - b * (w["ixx_mm4"] - w["iyy_mm4"])) / (a * a + b * b)
        )
    else:
        w["i1_mm4"] = mean_w
        w["i2_mm4"] = mean_w
        w["principal_angle_deg"] = np.zeros_like(dx)
    return w


def part_uncertainty(model: EdgeModel, weights: dict[str, np.ndarray]) -> tuple[dict[str, float], dict[str, float]]:
    """Edge-noise and threshold-offset standard uncertainties of each weighted figure.

    Returns
    -------
    edge, threshold : dict
        Figure name -> 1-sigma value in the figure's unit.
    """
    edge, thresh = {}, {}
    var_density = (model.sigma_n_mm**2) * model.corr_mm * model.lengths_mm
    for name, w in weights.items():
        edge[name] = float(math.sqrt(np.sum(w * w * var_density)))
        thresh[name] = float(abs(np.sum(w * model.lengths_mm)) * model.offset_mm)
    return edge, thresh


def ring_mean_offset_u(model: EdgeModel, ring_index: int) -> tuple[float, float, float, float]:
    """For one ring: (edge sigma of its mean radius, threshold offset, perimeter, centre sigma per axis).

    For a fitted circle the radius moves by the length-weighted mean normal displacement
    and the centre by twice the length-weighted mean of ``n dn`` (first-order result for
    a least-squares circle on a full ring).
    """
    sel = model.ring == ring_index
    lengths = model.lengths_mm[sel]
    perimeter = float(lengths.sum())
    var_density = (model.sigma_n_mm[sel] ** 2) * model.corr_mm[sel] * lengths
    radius_edge = math.sqrt(float(var_density.sum())) / perimeter
    nx, ny = model.normals[sel, 0], model.normals[sel, 1]
    cx = 2.0 * math.sqrt(float(np.sum(nx * nx * var_density))) / perimeter
    cy = 2.0 * math.sqrt(float(np.sum(ny * ny * var_density))) / perimeter
    return radius_edge, model.offset_mm, perimeter, math.hypot(cx, cy) / math.sqrt(2.0)


# ------------------------------------------------------------------ model-error floor

#: Keys' cubic-convolution parameter of OpenCV's ``INTER_CUBIC`` (what the segment stage uses).
KEYS_A = -0.75

#: Longest correlation length of the interpolation residual along an edge, px.
MAX_PHASE_CORRELATION_PX = 10.0


def _keys(t: np.ndarray, a: float = KEYS_A) -> np.ndarray:
    t = np.abs(t)
    out = np.zeros_like(t)
    m1 = t <= 1
    m2 = (t > 1) & (t < 2)
    out[m1] = (a + 2) * t[m1] ** 3 - (a + 3) * t[m1] ** 2 + 1
    out[m2] = a * t[m2] ** 3 - 5 * a * t[m2] ** 2 + 8 * a * t[m2] - 4 * a
    return out


@lru_cache(maxsize=256)
def _residual_cached(blur_centi_px: int) -> float:
    s_eff = max(blur_centi_px / 100.0, 0.3)
    s_opt = math.sqrt(max(s_eff * s_eff - 1.0 / 12.0, 1e-4))  # the pixel box is part of s_eff
    n = np.arange(-12, 13, dtype=float)
    erf = np.vectorize(math.erf)

    def step_integral(x: np.ndarray) -> np.ndarray:  # integral of the Gaussian edge Phi(x / s_opt)
        z = x / s_opt
        return s_opt * (z * 0.5 * (1.0 + erf(z / math.sqrt(2.0))) + np.exp(-0.5 * z * z) / math.sqrt(2 * math.pi))

    errors = []
    for phase in np.arange(32) / 32.0:
        samples = step_integral(n + 0.5 - phase) - step_integral(n - 0.5 - phase)  # exact pixel coverage
        x = phase
        for _ in range(30):
            value = float(np.dot(_keys(x - n), samples)) - 0.5
            slope = float(np.dot(_keys(x + 1e-5 - n) - _keys(x - 1e-5 - n), samples)) / 2e-5
            if slope <= 1e-9:
                break
            step = value / slope
            x -= max(-0.25, min(0.25, step))
            if abs(step) < 1e-10:
                break
        errors.append(x - phase)
    return float(np.sqrt(np.mean(np.square(errors))))


def interpolation_residual_px(blur_px: float) -> float:
    """RMS over the sub-pixel phase of the edge position error of the cubic interpolant, px.

    The edge is a unit step blurred by a Gaussian and integrated over square pixels
    (Gaussian-equivalent sigma ``blur_px``, pixel box included); its samples are
    interpolated with Keys' cubic kernel (``a = -0.75``, OpenCV's ``INTER_CUBIC``) and
    the crossing of the 0.5 level is compared with the true edge, over 32 phases.

    References
    ----------
    .. [1] R. Keys, IEEE Trans. ASSP 29(6), 1153-1160, 1981.

    Examples
    --------
    >>> 0.005 < interpolation_residual_px(0.8) < 0.02
    True
    """
    if not (blur_px > 0 and math.isfinite(blur_px)):
        blur_px = 0.3
    return _residual_cached(int(round(min(blur_px, 5.0) * 100)))


def phase_correlation_px(normals: np.ndarray) -> np.ndarray:
    """Length (px) over which the sub-pixel phase of an edge runs through one cycle.

    An edge whose normal makes the angle ``t`` with the nearest pixel axis crosses one
    pixel column (or row) every ``1 / |sin t|`` px along its length; capped at
    :data:`MAX_PHASE_CORRELATION_PX` and at least 1.
    """
    nx, ny = np.abs(normals[:, 0]), np.abs(normals[:, 1])
    sin_t = np.minimum(nx, ny)  # |sin| of the angle to the nearest axis
    return np.clip(1.0 / np.maximum(sin_t, 1e-9), 1.0, MAX_PHASE_CORRELATION_PX)


def level_modes(model: EdgeModel) -> np.ndarray:
    """The level-error modes (1, x, y, x^2, xy, y^2) over the boundary, orthonormalised.

    Returns (M, k) values at the vertices with ``sum(l * phi_j * phi_i) = L delta_ij``
    (mean square 1 over the boundary of length ``L``); the first mode is the constant 1.
    """
    p = model.points_mm
    lengths = model.lengths_mm
    total = float(lengths.sum())
    if total <= 0 or len(p) < 6:
        return np.ones((len(p), 1))
    centre = np.sum(p * lengths[:, None], axis=0) / total
    span = float(np.max(np.abs(p - centre))) or 1.0
    x, y = ((p - centre) / span).T
    basis = np.column_stack([np.ones_like(x), x, y, x * x, x * y, y * y])
    root = np.sqrt(lengths / total)
    q, r = np.linalg.qr(basis * root[:, None])
    keep = np.abs(np.diag(r)) > 1e-8 * abs(r[0, 0])
    modes = q[:, keep] / root[:, None]
    if modes[0, 0] < 0:
        modes[:, 0] = -modes[:, 0]
    return modes


def threshold_uncertainty(
    model: EdgeModel, weights: dict[str, np.ndarray], mode_offset_mm: float, constant_offset_mm: float
) -> dict[str, float]:
    """Threshold term: a smooth level-error field over the boundary plus a shared offset.

    ``mode_offset_mm`` is the 1-sigma boundary displacement of each of the orthonormal
    :func:`level_modes` (independent); ``constant_offset_mm`` a further displacement shared
    by the whole boundary (interpolation bias floor, level quantisation).
    """
    modes = level_modes(model)
    out = {}
    for name, w in weights.items():
        wl = w * model.lengths_mm
        per_mode = wl @ modes
        out[name] = float(
            math.hypot(mode_offset_mm * float(np.sqrt(np.sum(per_mode**2))), abs(float(wl.sum())) * constant_offset_mm)
        )
    return out


def model_uncertainty(
    model: EdgeModel,
    weights: dict[str, np.ndarray],
    *,
    sigma_m_mm: np.ndarray,
    corr_m_mm: np.ndarray,
    wall_u_mm: np.ndarray | None = None,
) -> dict[str, float]:
    """Model-error floor of each figure.

    ``sigma_m_mm`` (per vertex) with correlation length ``corr_m_mm`` behaves as edge
    noise; ``wall_u_mm`` (per vertex, zero off thin walls) is taken both as shared along
    the boundary and as independent per pixel, whichever is larger for the figure.
    """
    var_density = sigma_m_mm**2 * corr_m_mm * model.lengths_mm
    out = {}
    for name, w in weights.items():
        value = float(math.sqrt(np.sum(w * w * var_density)))
        if wall_u_mm is not None and np.any(wall_u_mm > 0):
            shared = abs(float(np.sum(w * model.lengths_mm * wall_u_mm)))
            local = float(math.sqrt(np.sum(w * w * wall_u_mm**2 * model.corr_mm * model.lengths_mm)))
            value = math.hypot(value, max(shared, local))
        out[name] = value
    return out


def removed_material(points_mm: np.ndarray, amounts_mm2: np.ndarray, props: object) -> dict[str, float]:
    """First-order change of each figure if material ``amounts_mm2`` at ``points_mm`` were removed.

    Removing a small area ``a`` at ``p`` changes a domain integral by ``-a f(p)`` (the same
    weights as :func:`figure_weights`, now over the area instead of along the boundary);
    returned as magnitudes, for a term that covers material the rings may count wrongly.
    ``props`` is the part's :class:`scanmass.section.SectionProperties`.
    """
    pts = np.asarray(points_mm, float).reshape(-1, 2)
    amount = np.asarray(amounts_mm2, float).reshape(-1)
    zeros = np.zeros(len(pts))
    probe = EdgeModel(pts, np.zeros_like(pts), zeros, zeros.astype(int), zeros, zeros, 0.0)
    p = props
    w = figure_weights(probe, p.area_mm2, p.centroid_mm, p.ixx_mm4, p.iyy_mm4, p.ixy_mm4)  # type: ignore[attr-defined]
    return {name: abs(float(np.sum(wk * amount))) for name, wk in w.items()}


#: Rounding radius of the level-0.5 contour at a sharp corner, in blur sigmas. Measured
#: here (not published): on exact-coverage renders (scanmass.testing.scans, truth from
#: shapely) of rectangles, triangles, hexagons and a plate with holes (turns 60-140 deg),
#: 300 and 600 dpi, Gaussian blur 0.5-1.5 px, clean, the traced perimeter's loss is
#: 0.55-1.46 times ``sigma sum (2 tan(theta / 2) - theta)`` (sigma: the blur the rings
#: estimate), the loss of circular fillets of radius sigma. 1.25 makes the term cover the
#: loss to within 1.2x and overstate it by at most 2.3x.
CORNER_RADIUS_SIGMA = 1.25


def corner_deficit_mm(rings_mm: list[np.ndarray], blur_mm: float, px_mm: float) -> float:
    """Perimeter a blurred outline loses at its corners, the ``corners`` term (mm).

    Blurring rounds every corner of the outline: the traced contour follows a fillet of
    radius about ``r = CORNER_RADIUS_SIGMA * blur`` instead of the sharp corner, and a
    fillet of radius ``r`` through a turn of ``theta`` is shorter than the two tangent
    lines it replaces by ``r (2 tan(theta / 2) - theta)`` (plane geometry), convex or
    concave alike. The turn of each corner is read off the traced ring as its net turning
    over windows of ``2 w`` of arc length, ``w = 4 blur + 2 px``: the change of heading
    between 2 px chords centred on the window's two ends, so that the traced polygon's
    pixel-scale zig-zags cancel. A fillet with its two chords spans at most
    ``r pi + 2 px <= w`` (for ``r <= 1.27 blur``), so it lies in one half window or in
    two neighbouring ones; the turns of two neighbours are taken together where that adds
    most to the total (never two overlapping pairs). A smooth outline of radius ``R`` turns by ``2 w / R`` per window,
    which adds only ``~ r (2 w / R)^3 / 12`` per window: a disc gets almost nothing.
    Turns are capped at 170 degrees (a needle tip), where ``tan`` diverges.

    Parameters
    ----------
    rings_mm : list of (N, 2) arrays
        The traced rings (outline and holes), mm.
    blur_mm : float
        The edge blur (Gaussian sigma), mm.
    px_mm : float
        One pixel in mm.

    Returns
    -------
    float
        The estimated total shortfall of the perimeter, mm (a magnitude).
    """
    if not (blur_mm > 0):
        return 0.0
    window = 4.0 * blur_mm + 2.0 * px_mm
    cap = math.radians(170.0)

    def fillet(t: np.ndarray) -> np.ndarray:  # per unit radius
        t = np.minimum(np.abs(t), cap)
        return 2.0 * np.tan(t / 2.0) - t

    total = 0.0
    for ring in rings_mm:
        ring = np.asarray(ring, float)
        if len(ring) < 3:
            continue
        edge = np.roll(ring, -1, axis=0) - ring
        seg = np.hypot(edge[:, 0], edge[:, 1])
        length = float(seg.sum())
        nbins = int(length // (2.0 * window))
        if nbins < 2:
            continue
        s_v = np.concatenate([[0.0], np.cumsum(seg)])  # arc length of each vertex, closed
        xs, ys = np.append(ring[:, 0], ring[0, 0]), np.append(ring[:, 1], ring[0, 1])
        # net turn of each half window (w long) from the chord headings (2 px chords) at
        # its two ends: the traced polygon's pixel-scale zig-zags cancel
        ends = np.arange(2 * nbins) / (2 * nbins) * length
        pa, pb = (ends - px_mm) % length, (ends + px_mm) % length
        dx = np.interp(pb, s_v, xs) - np.interp(pa, s_v, xs)
        dy = np.interp(pb, s_v, ys) - np.interp(pa, s_v, ys)
        heading = np.arctan2(dy, dx)
        half = np.angle(np.exp(1j * (np.roll(heading, -1) - heading)))
        pair = np.angle(np.exp(1j * (half + np.roll(half, -1))))  # half windows m and m + 1

        # a corner lies in one half window or straddles two: merge a pair where that adds
        # most, never two overlapping pairs
        gain = np.maximum(fillet(pair) - fillet(half) - fillet(np.roll(half, -1)), 0.0)
        chosen = (gain > 0) & (gain >= np.roll(gain, 1)) & (gain > np.roll(gain, -1))
        total += float(np.sum(fillet(half)) + np.sum(gain[chosen]))
    return CORNER_RADIUS_SIGMA * blur_mm * total


def roughness_mm(model: EdgeModel, sigma_m_mm: np.ndarray | None = None, ring_index: int | None = None) -> float:
    """Length the boundary's random wiggles add to the perimeter, the ``roughness`` term (mm).

    A curve displaced along its normal by ``delta(s)`` is longer by ``integral of
    delta'(s)^2 / 2 ds`` to second order (arc length of ``sqrt(1 + delta'^2)``); for a
    displacement of variance ``sigma^2`` correlated over ``l`` its slope's variance is of
    order ``sigma^2 / l^2``, so the expected gain is about ``sum sigma^2 L_i / l^2`` over the
    vertices (the constant is set to 1 here: derived here to order of magnitude; on noisy
    rendered discs it is 1.4-1.6 times the gain measured). It is a bias (the traced
    perimeter is always longer), taken as a 1-sigma term; the caller also takes the
    traced rings' own measured wiggle (:func:`wiggle_excess_mm`) where that is larger.
    ``ring_index`` (0 the outline, 1.. the holes) sums one ring's vertices only.
    """
    var = model.sigma_n_mm**2
    if sigma_m_mm is not None:
        var = var + np.asarray(sigma_m_mm, float) ** 2
    corr = np.where(model.corr_mm > 0, model.corr_mm, 1.0)
    gain = var * model.lengths_mm / corr**2
    if ring_index is not None:
        gain = gain[model.ring == ring_index]
    return float(np.sum(gain))


#: Ratio of the whole perimeter gain from a traced ring's wiggles to the length the ring
#: loses when every other vertex is dropped (:func:`wiggle_excess_mm`). Measured here (not
#: published): on exact-coverage renders of discs and octagons (300 and 600 dpi, blur
#: 0.5-1.5 px, clean and noisy) the perimeter error of a disc is 1.4-2.0 times that loss.
WIGGLE_RATIO = 2.0


def wiggle_excess_mm(rings_mm: list[np.ndarray]) -> float:
    """Length the traced rings lose when every other vertex is dropped (mm), both parities averaged.

    Each vertex ``p_i`` contributes ``|p_i - p_{i-1}| + |p_{i+1} - p_i| - |p_{i+1} - p_{i-1}|``
    (the triangle inequality's slack), half of it for each parity. On a smooth curve of
    curvature ``k`` sampled every ``h`` this is about ``h^2 k^2 / 8`` per unit length
    (negligible for a part's outline); what remains is the vertex-scale zig-zag that
    noise and the sampling of sharp edges leave in the traced ring: a measured lower
    bound of the roughness of the perimeter, which :data:`WIGGLE_RATIO` scales to the whole.
    """
    total = 0.0
    for ring in rings_mm:
        r = np.asarray(ring, float)
        if len(r) < 3:
            continue
        a, b = np.roll(r, 1, axis=0), np.roll(r, -1, axis=0)
        slack = np.hypot(*(r - a).T) + np.hypot(*(b - r).T) - np.hypot(*(b - a).T)
        total += 0.5 * float(slack.sum())
    return total
