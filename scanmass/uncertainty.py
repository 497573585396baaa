"""The error model: standard uncertainties (1 sigma) of a part's figures.

Three independent terms, each kept separately in the result (DESIGN.md):

edge
    Noise moves each boundary sample along its normal, independently over a correlation
    length of one pixel: ``sigma_n = (noise / contrast) / |grad|`` px at each vertex,
    where ``|grad|`` is the gradient of the normalised (0 = background, 1 = part) image.
threshold
    One shared offset ``d`` of the whole boundary, from the uncertainty of the local
    background and part levels (a level error ``delta`` of the contrast moves a blurred
    edge by ``sqrt(2 pi) sigma_blur delta`` px) plus a floor for the residual bias of
    linear interpolation between pixel centres.
scale
    The relative uncertainty of the pixel-to-mm map, or the spread of the figures over
    sampled maps when the scale source provides them (a fitted homography).

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
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from scanmass.geometry import signed_area
from scanmass.numeric import combine
from scanmass.section import boundary_influence

__all__ = [
    "EdgeModel",
    "THRESHOLD_FLOOR_PX",
    "build_edge_model",
    "combine",
    "figure_weights",
    "part_uncertainty",
    "ring_mean_offset_u",
]

#: Residual systematic offset of a marching-squares boundary on a sampled blurred edge
#: after the local-midpoint level, in pixels (1 sigma); set from the accuracy benchmark.
THRESHOLD_FLOOR_PX = 0.005

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
