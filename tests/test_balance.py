"""Static unbalance about a bore, ISO 21940-11 tolerances and the drilled-hole correction."""

from __future__ import annotations

import json
import math

import pytest
from plate_parts import circle_ring, disc, make_measurement, make_part, rect

from scanmass.errors import MaterialError, OptionError
from scanmass.mass.balance import CAUTIONS, balance_measurement, permissible_unbalance_gmm, static_unbalance

STEEL = 7850e-6  # g/mm3: carbon steel 7850 kg/m3 (EN 1993-1-1, 3.2.6; from memory)


# -- ISO 21940-11 permissible residual unbalance ----------------------------------------


@pytest.mark.parametrize(
    "grade, mass_kg, rpm",
    [
        (6.3, 10.0, 3000.0),  # fans, pumps grade; 10 kg at 3000 rpm
        (2.5, 0.5, 12000.0),
        (16.0, 2.0, 1500.0),
        (1.0, 0.2, 30000.0),
    ],
)
def test_permissible_unbalance_from_the_iso_21940_11_formula(grade, mass_kg, rpm):
    # ISO 21940-11: U_per = 1000 G m / omega [g mm], G in mm/s, m in kg, omega in rad/s.
    omega = 2 * math.pi * rpm / 60
    expected = 1000 * grade * mass_kg / omega
    assert permissible_unbalance_gmm(grade, mass_kg * 1000, rpm) == pytest.approx(expected, rel=1e-12)
    # the standard's rounded form 9549 G m / n (30000 / pi = 9549.3) agrees to 4e-5
    assert permissible_unbalance_gmm(grade, mass_kg * 1000, rpm) == pytest.approx(
        9549 * grade * mass_kg / rpm, rel=4e-5
    )


def test_permissible_unbalance_worked_number():
    # 1000 * 6.3 * 10 / (2 pi 3000 / 60) = 63000 / 314.159 = 200.535 g mm (hand calculation)
    assert permissible_unbalance_gmm(6.3, 10_000.0, 3000.0) == pytest.approx(200.535, abs=1e-3)


# -- disc with an off-centre bore: closed form ----------------------------------------------

R, RB, S = 50.0, 5.0, 2.0  # disc radius, bore radius, bore offset along +x (mm)
CX, CY = 60.0, 60.0  # disc centre
T = 3.0  # thickness (mm)


def off_centre_disc(**kw):
    return make_part([disc(R, CX, CY), disc(RB, CX + S, CY, sign=-1)], outline=circle_ring(R, CX, CY), **kw)


def test_disc_with_off_centre_bore_closed_form():
    # Derivation (composite rule for first moments, taken about the bore centre a):
    #   the part = full disc (area A_d, centre a - (S, 0)) minus the bore (area A_b, centre a).
    #   First moment about a: A_d * (-S) - A_b * 0 = -A_d S, so A e = A_d S with A = A_d - A_b,
    #   and U = m e = rho t A e = rho t A_d S = m_disc * S:
    #   the bore's own mass is removed exactly at the axis, so it adds no unbalance.
    # Heavy spot: from the bore towards the disc centre, i.e. -x (180 degrees).
    res = static_unbalance(off_centre_disc(), "carbon-steel", T)
    a_disc, a_bore = math.pi * R * R, math.pi * RB * RB
    m_disc = STEEL * a_disc * T
    assert res.unbalance_gmm == pytest.approx(m_disc * S, rel=1e-12)
    assert res.offset_mm == pytest.approx(S * a_disc / (a_disc - a_bore), rel=1e-12)
    assert res.heavy_angle_deg == pytest.approx(180.0)
    assert res.mass_g == pytest.approx(STEEL * (a_disc - a_bore) * T, rel=1e-12)
    assert res.hole == 1 and res.axis_mm == pytest.approx((CX + S, CY))


def test_offset_and_unbalance_uncertainty():
    # Offset along x only: u_e^2 = u_cx^2 + u_ax^2 (first-order, GUM 5.1.2); U = m e so
    # u_U^2 = (e u_m)^2 + (m u_e)^2.
    res = static_unbalance(off_centre_disc(centroid_u=0.01, hole_centre_u=0.02, area_u=5.0), "carbon-steel", T)
    assert res.offset_u_mm == pytest.approx(math.hypot(0.01, 0.02), rel=1e-12)
    assert res.unbalance_u_gmm == pytest.approx(
        math.hypot(res.offset_mm * res.mass_u_g, res.mass_g * res.offset_u_mm), rel=1e-12
    )


# -- correction ------------------------------------------------------------------------------


def test_drilled_hole_correction_brings_the_unbalance_to_zero():
    res = static_unbalance(off_centre_disc(), "carbon-steel", T)
    # default radius: midway between the bore's edge (5 mm) and the rim along -x (52 mm from the bore)
    assert res.correction_radius_mm == pytest.approx((RB + R + S) / 2)
    r = res.correction_radius_mm
    # m_c r = U (composite rule); through-hole d = sqrt(4 m_c / (pi rho t))
    m_c = res.unbalance_gmm / r
    assert res.remove_mass_g == pytest.approx(m_c) and res.add_mass_g == pytest.approx(m_c)
    assert res.remove_angle_deg == pytest.approx(180.0) and res.add_angle_deg == pytest.approx(0.0)
    assert res.hole_diameter_mm == pytest.approx(math.sqrt(4 * m_c / (math.pi * STEEL * T)), rel=1e-12)
    assert res.correction_fits is True
    assert res.corrected_unbalance_gmm == pytest.approx(0.0, abs=1e-9 * res.unbalance_gmm)

    # Re-measure independently: build the corrected part from closed forms (disc - bore -
    # drilled hole) and run the check on it again.
    cx, cy = res.correction_centre_mm
    corrected = make_part(
        [disc(R, CX, CY), disc(RB, CX + S, CY, sign=-1), disc(res.hole_diameter_mm / 2, cx, cy, sign=-1)]
    )
    again = static_unbalance(corrected, "carbon-steel", T, hole=1)
    assert again.unbalance_gmm == pytest.approx(0.0, abs=1e-9 * res.unbalance_gmm)
    assert again.mass_g == pytest.approx(res.corrected_mass_g, rel=1e-12)


def test_rounded_drill_leaves_the_closed_form_residual():
    # With the hole rounded to a 1 mm drill step, the residual first moment about the axis
    # is U - rho t (pi d^2 / 4) r, along the heavy direction (composite rule).
    res = static_unbalance(off_centre_disc(), "carbon-steel", T, correction_radius_mm=30.0, drill_step_mm=1.0)
    d = res.applied_hole_diameter_mm
    assert d == round(res.hole_diameter_mm) and d != res.hole_diameter_mm
    residual = abs(res.unbalance_gmm - STEEL * T * math.pi * d * d / 4 * 30.0)
    assert res.corrected_unbalance_gmm == pytest.approx(residual, rel=1e-9)


def test_blind_hole_depth_for_a_given_drill():
    # depth = m_c / (rho pi d^2 / 4) for a flat-bottomed hole (hand calculation)
    res = static_unbalance(off_centre_disc(), "carbon-steel", T, correction_radius_mm=40.0, drill_diameter_mm=25.0)
    m_c = res.unbalance_gmm / 40.0
    assert res.drill_depth_mm == pytest.approx(m_c / (STEEL * math.pi * 25.0**2 / 4), rel=1e-12)
    assert res.drill_depth_mm < T and not any("deeper than the plate" in n for n in res.notes)
    # a 10 mm drill would need 6.25 times the depth: more than the 3 mm plate
    deep = static_unbalance(off_centre_disc(), "carbon-steel", T, correction_radius_mm=40.0, drill_diameter_mm=10.0)
    assert deep.drill_depth_mm == pytest.approx(6.25 * res.drill_depth_mm)
    assert any("deeper than the plate" in n for n in deep.notes)


def test_correction_that_would_break_into_the_rim_is_flagged():
    res = static_unbalance(off_centre_disc(), "carbon-steel", T, correction_radius_mm=50.0)
    assert res.correction_fits is False
    assert any("break into an edge" in n for n in res.notes)


# -- verdicts --------------------------------------------------------------------------------


def test_verdicts_pass_fail_and_cannot_certify():
    part = off_centre_disc(centroid_u=0.002, hole_centre_u=0.002)
    # e = 2.02 mm; the permissible offset is G / omega.
    # G 4000 at 600 rpm: e_per = 4000 / 62.83 = 63.7 mm -> passes.
    ok = static_unbalance(part, "carbon-steel", T, rpm=600, grade=4000)
    assert ok.passes is True and ok.verdict.startswith("passes G 4000 at 600 rpm")
    assert ok.permissible_gmm == pytest.approx(permissible_unbalance_gmm(4000, ok.mass_g, 600))
    # G 6.3 at 3000 rpm: e_per = 6.3 / 314.16 = 0.020 mm -> fails.
    bad = static_unbalance(part, "carbon-steel", T, rpm=3000, grade=6.3)
    assert bad.passes is False and bad.verdict.startswith("fails G 6.3 at 3000 rpm")
    assert bad.permissible_offset_mm == pytest.approx(6.3 / (2 * math.pi * 50))
    # A nearly centred bore measured coarsely: u_e = 0.05 mm, e_per = 0.020 mm < 2 u_e.
    centred = make_part([disc(R), disc(RB, 0.001, 0, sign=-1)], centroid_u=0.05, hole_centre_u=0.0)
    unsure = static_unbalance(centred, "carbon-steel", T, rpm=3000, grade=6.3)
    assert unsure.passes is None
    assert unsure.verdict.startswith("cannot certify G 6.3 at 3000 rpm: the permissible offset")
    assert "below what this measurement resolves" in unsure.verdict
    # After the correction the residual is judged with the same resolution.
    assert bad.corrected_passes is True


def test_undecided_when_close_to_the_limit():
    # e_per = 16 / omega at 1000 rpm = 0.1528 mm; bore placed so e is about e_per, u_e = 0.03 mm.
    e_per = 16 / (2 * math.pi * 1000 / 60)
    a_disc, a_bore = math.pi * R * R, math.pi * RB * RB
    s = e_per * (a_disc - a_bore) / a_disc  # inverse of e = s A_d / A
    part = make_part([disc(R), disc(RB, s, 0, sign=-1)], centroid_u=0.03)
    res = static_unbalance(part, "carbon-steel", T, rpm=1000, grade=16)
    assert res.offset_mm == pytest.approx(e_per, rel=1e-9)
    assert res.passes is None and res.verdict.startswith("undecided for G 16 at 1000 rpm")


def test_bore_nearest_the_centroid_is_the_default_axis():
    # 100 x 100 plate centred at (0, 0): a bore near the middle and a small hole near a corner.
    part = make_part([rect(100, 100), disc(3, 40, 40, sign=-1), disc(6, 1, 0, sign=-1)])
    res = static_unbalance(part, "aluminium-6061", 2.0)
    assert res.hole == 2 and res.bore_diameter_mm == pytest.approx(12.0)
    assert static_unbalance(part, "aluminium-6061", 2.0, hole=1).hole == 1


def test_result_document_keys_and_cautions():
    res = balance_measurement(
        make_measurement([make_part([rect(10, 10)], label=1), off_centre_disc(label=2)]),
        "steel",
        T,
        part=2,
        rpm=3000,
        grade=6.3,
    )
    doc = json.loads(json.dumps(res.to_dict(), allow_nan=False))
    for key in (
        "offset_mm",
        "offset_u_mm",
        "unbalance_gmm",
        "unbalance_u_gmm",
        "heavy_angle_deg",
        "permissible_gmm",
        "passes",
        "verdict",
        "cautions",
    ):
        assert key in doc
    assert doc["passes"] is False and doc["part"] == 2
    assert "balancing machine" in doc["cautions"] and "fail dangerously" in doc["cautions"]
    assert "qualified practice" in CAUTIONS
    no_speed = static_unbalance(off_centre_disc(), "steel", T)
    assert no_speed.passes is None and no_speed.verdict.startswith("not judged")


# -- bad input -------------------------------------------------------------------------------


def test_part_without_a_hole():
    with pytest.raises(OptionError, match=r"^part 3 has no hole to spin about; "):
        static_unbalance(make_part([rect(40, 20)], label=3), "steel", 2.0)


@pytest.mark.parametrize(
    "kwargs, error, match",
    [
        (dict(hole=9), OptionError, r"part 1 has no hole 9 \(holes: 1\)"),
        (dict(rpm=3000), OptionError, r"give both the speed \(rpm\) and the balance quality grade"),
        (dict(rpm=-5, grade=6.3), OptionError, r"rpm must be a positive number of rev/min, got -5"),
        (dict(rpm=3000, grade=0), OptionError, r"grade must be a positive number of mm/s, got 0"),
        (dict(thickness_mm=0), OptionError, r"thickness_mm must be a positive number of mm, got 0"),
        (dict(material="stee"), MaterialError, r"unknown material 'stee' \(close names: "),
        (dict(correction_radius_mm=-1), OptionError, r"correction_radius_mm must be a positive number"),
    ],
)
def test_bad_balance_options(kwargs, error, match):
    args = {"material": "carbon-steel", "thickness_mm": T}
    args.update(kwargs)
    with pytest.raises(error, match=match) as info:
        static_unbalance(off_centre_disc(), args.pop("material"), args.pop("thickness_mm"), **args)
    assert "\n" not in str(info.value)


def test_measurement_with_several_parts_needs_a_part_label():
    m = make_measurement([off_centre_disc(label=1), off_centre_disc(label=2)])
    with pytest.raises(OptionError, match=r"plates.png: has 2 parts \(1, 2\); choose one by its label"):
        balance_measurement(m, "steel", T)
    with pytest.raises(OptionError, match=r"plates.png: has no part 5 \(parts: 1, 2\)"):
        balance_measurement(m, "steel", T, part=5)
