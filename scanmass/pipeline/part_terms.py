"""One part's figures and uncertainty terms: section, error model, scale, and the named terms added for conditions.

Part of the pipeline stage (:mod:`scanmass.pipeline`): :func:`measure_part` turns a mapped part into a
:class:`~scanmass.measurement.Part`; the helpers add a named term (half the change of every figure between
two outlines, or a given term) to a part's totals.
"""

from __future__ import annotations

import math
from dataclasses import fields, replace
from typing import Any

import numpy as np

from scanmass.geometry import signed_area, vertex_spread
from scanmass.mapping import MappedPart
from scanmass.measurement import Hole, Part
from scanmass.scale.planemap import PlaneMap
from scanmass.section import (
    SectionProperties,
    convex_hull,
    fit_circle,
    ring_moments,
    ring_perimeter,
    sampled_figures,
    section_properties,
)
from scanmass.segment.thin import (
    RESIDUAL_WINDOW_PX,
    EdgeQuantisation,
)
from scanmass.uncertainty import (
    WIGGLE_RATIO,
    build_edge_model,
    combine,
    corner_deficit_mm,
    edge_sigma_mm,
    figure_weights,
    interpolation_residual_px,
    model_uncertainty,
    part_uncertainty,
    phase_correlation_px,
    removed_material,
    ring_mean_offset_u,
    roughness_mm,
    threshold_uncertainty,
    wiggle_excess_mm,
)

#: Fewest sampled maps from which the scale term is taken as their spread.
MIN_SCALE_SAMPLES = 8

_FIGURES_SCALE_POWER = {
    "area_mm2": 2,
    "ixx_mm4": 4,
    "iyy_mm4": 4,
    "ixy_mm4": 4,
    "i1_mm4": 4,
    "i2_mm4": 4,
    "polar_mm4": 4,
    "principal_angle_deg": 0,
}


#: A part's uncertainty fields and the figure each one belongs to (the centroid's pair aside).
U_FIELDS = {
    "area_u_mm2": "area_mm2",
    "perimeter_u_mm": "perimeter_mm",
    "ixx_u_mm4": "ixx_mm4",
    "iyy_u_mm4": "iyy_mm4",
    "ixy_u_mm4": "ixy_mm4",
    "i1_u_mm4": "i1_mm4",
    "i2_u_mm4": "i2_mm4",
    "polar_u_mm4": "polar_mm4",
    "principal_angle_u_deg": "principal_angle_deg",
}


def change_term(
    outer_mm: np.ndarray,
    holes_mm: list[np.ndarray],
    new_outer_mm: np.ndarray,
    new_holes_mm: list[np.ndarray],
    share: float = 1.0,
) -> dict[str, float]:
    """``share`` of the change of every figure when a part's rings are replaced by other rings (a term).

    0.5 takes the other rings at 2 sigma; the principal angle's change is taken modulo 180 degrees.
    """
    before = _figure_values(section_properties(outer_mm, holes_mm, hull=False))
    after = _figure_values(section_properties(new_outer_mm, new_holes_mm, hull=False))
    term = {name: share * abs(after[name] - before[name]) for name in before}
    d_angle = (after["principal_angle_deg"] - before["principal_angle_deg"] + 90.0) % 180.0 - 90.0
    term["principal_angle_deg"] = share * abs(d_angle)
    return term


def area_share_term(part: Part, area_mm2: float, weight: float = 1.0) -> dict[str, float]:
    """A term for material of ``area_mm2`` that the outline may hold or miss somewhere along it.

    Its share ``s`` of the part's area bounds the rest: the centroid by ``s`` times half the
    part's largest caliper width, the perimeter by ``s`` times the perimeter, each second
    moment by ``2 s`` times its own size (Ixy by the larger of itself and Ixx). All are
    multiplied by ``weight`` (0.5 where the condition is taken at 2 sigma).
    """
    share = min(1.0, area_mm2 / max(part.area_mm2, 1e-9))
    arm_mm = 0.5 * part.caliper_max_mm
    term = {
        "area_mm2": weight * area_mm2,
        "centroid_x_mm": weight * share * arm_mm,
        "centroid_y_mm": weight * share * arm_mm,
        "perimeter_mm": weight * share * part.perimeter_mm,
        "principal_angle_deg": 0.0,
    }
    for fig in ("ixx_mm4", "iyy_mm4", "ixy_mm4", "i1_mm4", "i2_mm4", "polar_mm4"):
        size = max(abs(getattr(part, fig)), abs(part.ixx_mm4) if fig == "ixy_mm4" else 0.0)
        term[fig] = weight * 2 * share * size
    return term


def _with_shadow_term(
    part: Part, term: dict[str, float], hole_d_u_mm: float, name: str = "cast_shadow", hole_c_u_mm: float = 0.0
) -> Part:
    """The part with a term ``name``; a hole can be narrowed by a shadow (or a lost reflection) too.

    ``hole_d_u_mm`` joins each hole's diameter uncertainty, ``hole_c_u_mm`` each axis of its
    centre's (a shadow along one side of a hole moves its centre).
    """
    holes = [
        replace(
            h,
            diameter_u_mm=combine(h.diameter_u_mm, hole_d_u_mm),
            circle_centre_u_mm=(
                combine(h.circle_centre_u_mm[0], hole_c_u_mm),
                combine(h.circle_centre_u_mm[1], hole_c_u_mm),
            ),
        )
        for h in part.holes
    ]
    updated = replace(part, holes=holes)
    return _with_extra_term(updated, name, term, [])


#: Thickness (mm) whose parallax the uncertainty of a photo covers (as 2 sigma) when the
#: part's thickness is not given; common plate and sheet stock is 0.5-3 mm.
UNKNOWN_THICKNESS_MM = 3.0


def circle_change(
    ring: np.ndarray | None,
    moved: np.ndarray,
    diameter_mm: float | None = None,
    centre_mm: tuple[float, float] | None = None,
) -> tuple[float, float, float]:
    """How far a hole's fitted circle moves when its ring moves to ``moved``: diameter, centre x, centre y.

    Each change is the fits' difference, but at most what the ring itself moved: the
    Hausdorff distance between the two rings' vertices (twice it for the diameter). A ring
    that is far from round can send a least-squares circle anywhere (a fit of a ragged ring
    a few mm across ran off to 1e12 mm); the hole as drawn moved no more than its vertices.
    ``diameter_mm`` and ``centre_mm`` are the fit of ``ring`` where the caller has it (they
    are needed when ``ring`` is None: then the fits' difference alone is taken).
    """
    if diameter_mm is None or centre_mm is None:
        if ring is None:
            raise ValueError("circle_change: give the ring or its fitted circle")
        before = fit_circle(ring)
        diameter_mm, centre_mm = before.diameter_mm, before.centre_mm
    after = fit_circle(moved)
    spread = vertex_spread(ring, moved) if ring is not None and len(ring) else math.inf
    return (
        min(abs(after.diameter_mm - diameter_mm), 2.0 * spread),
        min(abs(after.centre_mm[0] - centre_mm[0]), spread),
        min(abs(after.centre_mm[1] - centre_mm[1]), spread),
    )


def _with_extra_term(part: Part, name: str, term: dict[str, float], raised_holes: list[np.ndarray]) -> Part:
    """The part with one more named uncertainty term, combined into every total it touches."""
    changes: dict[str, Any] = {key: combine(getattr(part, key), term[fig]) for key, fig in U_FIELDS.items()}
    changes["centroid_u_mm"] = (
        combine(part.centroid_u_mm[0], term["centroid_x_mm"]),
        combine(part.centroid_u_mm[1], term["centroid_y_mm"]),
    )
    holes = []
    for hole, raised in zip(part.holes, raised_holes):
        a, qx, qy = ring_moments(raised)[:3]
        moved_d, moved_cx, moved_cy = circle_change(hole.outline_mm, raised, hole.diameter_mm, hole.circle_centre_mm)
        d_d = 0.5 * moved_d
        d_a = 0.5 * abs(abs(float(a)) - hole.area_mm2)
        d_c = (0.5 * abs(float(qx / a) - hole.centroid_mm[0]), 0.5 * abs(float(qy / a) - hole.centroid_mm[1]))
        d_cc = (0.5 * moved_cx, 0.5 * moved_cy)
        holes.append(
            replace(
                hole,
                diameter_u_mm=combine(hole.diameter_u_mm, d_d),
                area_u_mm2=combine(hole.area_u_mm2, d_a),
                centroid_u_mm=(combine(hole.centroid_u_mm[0], d_c[0]), combine(hole.centroid_u_mm[1], d_c[1])),
                circle_centre_u_mm=(
                    combine(hole.circle_centre_u_mm[0], d_cc[0]),
                    combine(hole.circle_centre_u_mm[1], d_cc[1]),
                ),
            )
        )
    if len(holes) < len(part.holes):
        holes += part.holes[len(holes) :]
    terms = dict(part.uncertainty_terms)
    terms[name] = dict(term)
    return replace(part, holes=holes, uncertainty_terms=terms, **changes)


def _scale_terms(part: MappedPart, plane_map: PlaneMap, props: SectionProperties) -> dict[str, float]:
    """Scale-term standard uncertainties of the main figures (mm only: the sampled maps' rings come mapped)."""
    if len(part.sample_rings_mm) >= MIN_SCALE_SAMPLES:
        values: dict[str, list[float]] = {}
        sampled = sampled_figures(part.sample_rings_mm)  # all at once: the same floats
        if sampled is None:
            sampled = [section_properties(o, list(h), hull=False) for o, h in part.sample_rings_mm]  # no hull
        for sp in sampled:
            for name, val in _figure_values(sp).items():
                values.setdefault(name, []).append(val)
        out = {k: float(np.std(v, ddof=1)) for k, v in values.items()}
        rel = plane_map.terms.get("printer", 0.0)
        for name, val in _figure_values(props).items():  # printer scale: not in the sampled maps
            p = _FIGURES_SCALE_POWER.get(name, 1)
            out[name] = combine(out[name], p * rel * abs(val))
        return out
    rel = plane_map.rel_u
    out = {}
    for name, val in _figure_values(props).items():
        p = _FIGURES_SCALE_POWER.get(name, 1)
        out[name] = p * rel * abs(val)
    return out


def _figure_values(sp: SectionProperties) -> dict[str, float]:
    return {
        "area_mm2": sp.area_mm2,
        "centroid_x_mm": sp.centroid_mm[0],
        "centroid_y_mm": sp.centroid_mm[1],
        "ixx_mm4": sp.ixx_mm4,
        "iyy_mm4": sp.iyy_mm4,
        "ixy_mm4": sp.ixy_mm4,
        "i1_mm4": sp.i1_mm4,
        "i2_mm4": sp.i2_mm4,
        "polar_mm4": sp.polar_mm4,
        "principal_angle_deg": sp.principal_angle_deg,
        "perimeter_mm": sp.perimeter_mm,
    }


def measure_part(
    part: MappedPart,
    plane_map: PlaneMap,
    *,
    quantisation: EdgeQuantisation | None = None,
    wall_u_px: list[np.ndarray] | None = None,
    residual_px: list[np.ndarray] | None = None,
    closed_mm: np.ndarray | None = None,
    extra_mm: list[tuple[np.ndarray, float]] | None = None,
    extra_perimeter_mm: float = 0.0,
    extra_perimeter_u_mm: float = 0.0,
) -> Part:
    """Section properties and uncertainties of one mapped part (everything in mm).

    ``plane_map`` gives only the scale's relative uncertainty and its named terms;
    ``quantisation`` the grey-level steps at the part's edge and ``wall_u_px`` the
    per-vertex uncertainty of the thin-wall step (per ring, in the mapped vertex order),
    ``residual_px`` the per-vertex displacement from the edge model's measured residual
    (:func:`scanmass.segment.thin.edge_residual_px`, same order), and ``closed_mm`` the
    material a closed narrow slot may lack (rows x_mm, y_mm, mm2), all for the model-error
    floor (:mod:`scanmass.uncertainty`). ``extra_mm`` holds closed slots (sign -1) and
    vanished walls (+1) measured by the integral rule
    (:func:`scanmass.segment.closedfeat.measure_closed`), rings in mm, with what they change
    the perimeter by, ``extra_perimeter_mm`` (1-sigma ``extra_perimeter_u_mm``); their
    material joins the figures, and
    ``closed_mm`` then carries each one's 1-sigma area spread over its pixels.
    """
    outer_mm = part.outer_mm
    holes_mm = list(part.holes_mm)
    props = section_properties(outer_mm, holes_mm, extra=extra_mm or (), extra_perimeter_mm=extra_perimeter_mm)

    # -- error model inputs -----------------------------------------------------------
    scale_outer = part.mm_per_px[0]
    scales = list(part.mm_per_px)
    sigma_n_px = [part.noise_rel / np.maximum(g, 0.05) for g in part.gradients_px]
    mm_px = float(np.median(scale_outer))
    blur = part.blur_px if math.isfinite(part.blur_px) else 1.0
    # threshold: each of the level surfaces' modes moves the boundary by sqrt(2 pi) sigma_blur
    # times its share of the normalised level; (db + df) / 2 of the contrast, per mode 1/6 of
    # the pointwise variance that level_rel_u states
    mode_px = math.sqrt(2 * math.pi) * blur * part.level_rel_u / (2.0 * math.sqrt(6.0))
    q = quantisation or EdgeQuantisation(0.0, 0.0)
    # the levels' rounding bias, and the shared asymmetry of the edge profile (processing in
    # the encoded domain: JPEG's block quantisation, a tone curve applied after the blur)
    shared_px = math.hypot(math.sqrt(2 * math.pi) * blur * q.level_rel, q.asymmetry_px)
    offset_px = math.hypot(math.sqrt(6.0) * mode_px, shared_px)  # the whole-boundary share, as before
    offset_mm = offset_px * mm_px
    model = build_edge_model(outer_mm, holes_mm, sigma_n_px, scales, offset_mm)
    weights = figure_weights(model, props.area_mm2, props.centroid_mm, props.ixx_mm4, props.iyy_mm4, props.ixy_mm4)
    edge_u, _ = part_uncertainty(model, weights)
    thresh_u = threshold_uncertainty(model, weights, mode_px * mm_px, shared_px * mm_px)
    # model-error floor: interpolation residual (phase-correlated) and quantisation beyond the noise
    resid_px = interpolation_residual_px(blur)
    q_px = [
        np.sqrt(max((q.edge_rel / math.sqrt(12.0)) ** 2 - part.noise_rel**2, 0.0)) / np.maximum(g, 0.05)
        for g in part.gradients_px
    ]
    q_sigma_mm = edge_sigma_mm(outer_mm, holes_mm, q_px, scales)
    corr_phase = phase_correlation_px(model.normals)
    px_mm = model.corr_mm  # the model's 1 px correlation length in mm = local mm per px
    density_px = resid_px**2 * corr_phase  # px^2 x px: the phase-correlated interpolation residual
    if residual_px is not None:
        # the measured residual holds the interpolation error of this image's own edges
        # (and JPEG's blocks, corners): it replaces the modelled one
        measured_mm = edge_sigma_mm(outer_mm, holes_mm, residual_px, [np.ones(len(r)) for r in residual_px])
        density_px = measured_mm**2 * RESIDUAL_WINDOW_PX
    sigma_m_mm = np.sqrt(density_px * px_mm**2 + q_sigma_mm**2)
    wall_mm = None
    if wall_u_px is not None and any(np.any(np.asarray(w) > 0) for w in wall_u_px):
        wall_mm = edge_sigma_mm(outer_mm, holes_mm, wall_u_px, scales)
    model_u = model_uncertainty(model, weights, sigma_m_mm=sigma_m_mm, corr_m_mm=px_mm, wall_u_mm=wall_mm)
    if closed_mm is not None and len(closed_mm):
        # unresolved: the whole of the slot's missing material is the 1-sigma term; measured
        # (extra_mm): the pixels' shares scaled to the measured area's 1-sigma
        lacking = removed_material(closed_mm[:, :2], closed_mm[:, 2], props)
        model_u = {k: math.hypot(v, lacking.get(k, 0.0)) for k, v in model_u.items()}
    scale_u = _scale_terms(part, plane_map, props)
    # perimeter: a uniform offset d changes it by 2 pi d per ring (turning number)
    n_rings = 1 + len(holes_mm)
    thresh_u["perimeter_mm"] = 2 * math.pi * offset_mm * abs(1 - len(holes_mm))
    edge_u["perimeter_mm"] = 0.0
    model_u["perimeter_mm"] = extra_perimeter_u_mm
    # the perimeter's own terms: corners rounded by the blur (shorter), wiggles of noise
    # and of the model floor (longer); each a bias taken as a 1-sigma term
    floor_mm = np.full(len(model.corr_mm), resid_px) * model.corr_mm  # the modelled floor, per vertex
    perim_u = {
        "corners": {"perimeter_mm": corner_deficit_mm([outer_mm, *holes_mm], blur * mm_px, mm_px)},
        "roughness": {
            "perimeter_mm": max(roughness_mm(model, floor_mm), WIGGLE_RATIO * wiggle_excess_mm([outer_mm, *holes_mm]))
        },
    }
    total = {
        k: combine(edge_u.get(k, 0.0), thresh_u.get(k, 0.0), model_u.get(k, 0.0), scale_u.get(k, 0.0)) for k in scale_u
    }
    total["perimeter_mm"] = combine(total["perimeter_mm"], *(t["perimeter_mm"] for t in perim_u.values()))
    terms = {
        "edge": edge_u,
        "threshold": thresh_u,
        "model": model_u,
        "scale": scale_u,
        **perim_u,
        "inputs": {
            "noise_rel": part.noise_rel,
            "blur_px": part.blur_px,
            "level_rel_u": part.level_rel_u,
            "offset_px": offset_px,
            "interpolation_residual_px": resid_px,
            "quantisation_rel": q.edge_rel,
            "asymmetry_px": q.asymmetry_px,
            "contrast": part.contrast,
            "rings": n_rings,
        },
    }

    holes = []
    for k, ring_mm in enumerate(holes_mm, start=1):
        a, qx, qy = ring_moments(ring_mm)[:3]  # a hole's own area and centroid, whatever its orientation
        area_mm2, centroid_mm = abs(float(a)), (float(qx / a), float(qy / a))
        fit = fit_circle(ring_mm)
        r_edge, r_off, perim, c_edge = ring_mean_offset_u(model, k)
        d_u = combine(2 * r_edge, 2 * r_off, plane_map.rel_u * fit.diameter_mm)
        # the area moves by the perimeter times the mean normal displacement
        area_u = combine(perim * r_edge, perim * r_off, 2 * plane_map.rel_u * area_mm2)
        cen_u = (
            combine(c_edge, plane_map.rel_u * abs(centroid_mm[0])),
            combine(c_edge, plane_map.rel_u * abs(centroid_mm[1])),
        )
        circ_u = (
            combine(c_edge, plane_map.rel_u * abs(fit.centre_mm[0])),
            combine(c_edge, plane_map.rel_u * abs(fit.centre_mm[1])),
        )
        # its perimeter: the part perimeter's terms for this ring alone (a uniform offset d
        # changes one ring's length by 2 pi d; its corners; its wiggles; the scale)
        perim_ring = ring_perimeter(ring_mm)
        hole_perim_u = combine(
            2 * math.pi * offset_mm,
            corner_deficit_mm([ring_mm], blur * mm_px, mm_px),
            max(roughness_mm(model, floor_mm, ring_index=k), WIGGLE_RATIO * wiggle_excess_mm([ring_mm])),
            plane_map.rel_u * perim_ring,
        )
        holes.append(
            Hole(
                label=k,
                area_mm2=area_mm2,
                area_u_mm2=area_u,
                centroid_mm=centroid_mm,
                centroid_u_mm=cen_u,
                perimeter_mm=perim_ring,
                perimeter_u_mm=hole_perim_u,
                circle_centre_mm=fit.centre_mm,
                circle_centre_u_mm=circ_u,
                diameter_mm=fit.diameter_mm,
                diameter_u_mm=d_u,
                roundness_mm=fit.roundness_mm,
                outline_mm=ring_mm,
            )
        )

    u_fields: dict[str, Any] = {key: total[fig] for key, fig in U_FIELDS.items()}
    return Part(
        label=part.label,
        **{f.name: getattr(props, f.name) for f in fields(props)},  # the section properties, same names
        **u_fields,
        centroid_u_mm=(total["centroid_x_mm"], total["centroid_y_mm"]),
        holes=holes,
        cut=part.cut,
        uncertainty_terms=terms,
        outline_mm=outer_mm,
        filled_holes=part.filled_holes,
        filled_hole_area_mm2=part.filled_hole_area_mm2,
    )


def with_fragment_term(part: Part, mapped: MappedPart, pieces_mm: list[np.ndarray]) -> Part:
    """The part, found in pieces and merged (:mod:`scanmass.segment.fragments`), with the term ``fragments``.

    What lies between the pieces was not found as material, but one body of one material may
    fill it: the term is the convex hull of the pieces' outlines less the area found and its
    holes (taken at 1 sigma), with its share of the centroid, perimeter and moments
    (:func:`area_share_term`).
    """
    hull = convex_hull(np.concatenate([np.asarray(mapped.outer_mm, float), *pieces_mm]))
    found_mm2 = part.area_mm2 + sum(h.area_mm2 for h in part.holes)
    gap_mm2 = max(abs(signed_area(hull)) - found_mm2, 0.0) if len(hull) >= 3 else 0.0
    return _with_extra_term(part, "fragments", area_share_term(part, gap_mm2), [])


def fragment_warnings(fragments: list[Any], parts: list[Part], mm_per_px: float) -> list[str]:
    """A warning for each part that was found in pieces and merged (``part N: ...``, as the part's own warnings)."""
    into: dict[int, list[Any]] = {}
    for f in fragments:
        into.setdefault(f.into, []).append(f)
    out = []
    for part in parts:
        if part.label not in into:
            continue
        term = part.uncertainty_terms.get("fragments", {}).get("area_mm2", 0.0)
        gaps = ", ".join(f"{f.gap_px * mm_per_px:.2g}" for f in into[part.label])
        out.append(
            f"part {part.label}: found in pieces ({len(into[part.label])} small piece(s) {gaps} mm away across a strip "
            "of the part's own grain or a painted cut, not clean paper: a bright or sparkling face taken for paper in "
            f"places) and merged; up to {term:.3g} mm² between the pieces may be part too, and the uncertainty "
            "includes it (term 'fragments'); for a trustworthy figure use diffuse light, or a backlight"
        )
    return out


#: The share of a recovered lit region of a face (:mod:`scanmass.segment.brightface`) taken as the
#: term's 1 sigma: a region that was no face lies 2 sigma off (as the term ``side_wall``).
LOST_FACE_WEIGHT = 0.5


def with_lost_face_term(part: Part, lost_mm2: float) -> Part:
    """The part with the term ``lost_face``: half the area of its face's lit regions joined to it."""
    return _with_extra_term(part, "lost_face", area_share_term(part, lost_mm2, LOST_FACE_WEIGHT), [])


#: Least share of a part's area its joined lit regions hold for the part to be taken as no cast
#: shadow alone (:func:`has_lit_face`): a shadow has no lit face; a few lit grains beside a
#: grainy region (mixed-steel-t10: 4 % in four patches of 100-170 px) say little.
LIT_FACE_SHARE = 0.1


def has_lit_face(part: Part) -> bool:
    """Whether a lit region of the part's face, at least :data:`LIT_FACE_SHARE` of its area, was joined to it,
    or a stretch of its face was found by its dense grain (term ``grain_face``: a shadow has none)."""
    if "grain_face" in part.uncertainty_terms:
        return True
    term = part.uncertainty_terms.get("lost_face")
    return term is not None and term["area_mm2"] / LOST_FACE_WEIGHT >= LIT_FACE_SHARE * part.area_mm2


def lost_face_warnings(parts: list[Part]) -> list[str]:
    """A warning for each part whose lit face was found only in part and joined up to its sharp edge."""
    out = []
    for part in parts:
        term = part.uncertainty_terms.get("lost_face")
        if not term:
            continue
        area = term["area_mm2"] / LOST_FACE_WEIGHT
        out.append(
            f"part {part.label}: {area:.3g} mm² of its face ({100 * area / max(part.area_mm2, 1e-9):.2g} %) mirrors "
            "the light almost as bright as the paper and was not found at first; it was joined up to the sharp edge "
            "where it meets the paper, and the uncertainty includes half of it (term 'lost_face'); for a trustworthy "
            "figure photograph metal in diffuse light"
        )
    return out


#: Width (px) of the band along a grainy face's edge (:func:`~scanmass.segment.brightface.grain_face_regions`)
#: taken as the term ``grain_face``'s 1 sigma: the edge is placed by the grain's energy, smoothed
#: over about 2 px, not by a level step, and the face's own level near its edge (the threshold
#: step's residual) moves it by a pixel or so.
GRAIN_EDGE_U_PX = 2.0


def with_grain_face_term(part: Part, band_mm2: float) -> Part:
    """The part with the term ``grain_face``: the band along its grainy face's edge as an area."""
    return _with_extra_term(part, "grain_face", area_share_term(part, band_mm2), [])


def grain_face_warnings(parts: list[Part]) -> list[str]:
    """A warning for each part whose lit face at the paper's level was found by its grain alone."""
    out = []
    for part in parts:
        term = part.uncertainty_terms.get("grain_face")
        if not term:
            continue
        out.append(
            f"part {part.label}: part of its face mirrors the light at the paper's level and colour and was not "
            "found by its level; it was found by its grain (a brushed face varies from pixel to pixel, the paper "
            f"does not) and joined; its edge there is placed by the grain alone, and the uncertainty includes "
            f"{term['area_mm2']:.3g} mm² for it (term 'grain_face'); for a trustworthy figure photograph metal in "
            "diffuse light, or on a dark background"
        )
    return out
