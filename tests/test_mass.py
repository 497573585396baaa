"""Materials and plate mass: check values from handbook densities and dynamics tables."""

from __future__ import annotations

import dataclasses
import math

import pytest
from plate_parts import disc, make_measurement, make_part, polygon, rect

from scanmass.errors import MaterialError, OptionError
from scanmass.mass.materials import Material, find_material, load_materials
from scanmass.mass.plate import STANDARD_GRAVITY_M_S2, apply_mass, plate_mass
from scanmass.measurement import Measurement

REL = 1e-12  # exact closed forms: only rounding separates the values


def close(a: float, b: float, rel: float = REL) -> bool:
    return a == pytest.approx(b, rel=rel, abs=1e-12)


# -- materials -------------------------------------------------------------------------


def test_material_table_has_the_issue_materials_with_sources():
    table = load_materials()
    for name in [
        "steel",
        "stainless 304",
        "stainless-316",
        "aluminium 6061",
        "5083",
        "1050",
        "brass",
        "copper",
        "Ti-6Al-4V",
        "acrylic",
        "polycarbonate",
        "HDPE",
        "ABS",
        "PLA",
        "plywood",
        "MDF",
        "cork",
        "neoprene",
        "EPDM",
        "FR4",
    ]:
        mat = find_material(name, table)
        assert mat.source, mat.key
        assert mat.density_min_kg_m3 <= mat.density_kg_m3 <= mat.density_max_kg_m3


def test_density_uncertainty_is_rectangular_half_width_over_root3():
    # GUM (JCGM 100:2008) 4.3.7: a rectangular distribution of half-width a has u = a / sqrt(3).
    steel = find_material("carbon-steel")
    assert close(steel.density_u_kg_m3, (7880 - 7800) / 2 / math.sqrt(3))


@pytest.mark.parametrize(
    "name, key",
    [
        ("Aluminum 6061", "aluminium-6061"),  # US spelling folded
        ("STAINLESS_304", "stainless-304"),  # case and separators ignored
        ("1.4401", "stainless-316"),  # EN number alias
        ("ti6al4v", "titanium-ti6al4v"),
    ],
)
def test_find_material_ignores_case_separators_and_spelling(name, key):
    assert find_material(name).key == key


def test_unknown_material_lists_close_names():
    with pytest.raises(MaterialError, match=r"unknown material 'alumnium' \(close names: .*aluminium-6061"):
        find_material("alumnium")
    with pytest.raises(MaterialError, match=r"unknown material 'unobtainium' \(no close names\)"):
        find_material("unobtainium")


def test_user_file_adds_and_overrides(tmp_path):
    user = tmp_path / "shop.toml"
    user.write_text(
        "[material.carbon-steel]\ndensity_kg_m3 = 7860\n"
        '[material.foam-pvc]\nname = "Foamed PVC board"\ndensity_kg_m3 = 500\n'
        'density_range_kg_m3 = [450, 550]\naliases = ["foam board"]\nsource = "supplier datasheet"\n',
        encoding="utf-8",
    )
    table = load_materials(user)
    steel = find_material("steel", table)
    assert steel.density_kg_m3 == 7860 and steel.density_max_kg_m3 == 7880  # range kept from the shipped entry
    assert find_material("Foam Board", table).density_kg_m3 == 500


@pytest.mark.parametrize(
    "text, match",
    [
        ("[material.x]\ndensity_kg_m3 = -5\n", r"shop.toml: material 'x': density must be a positive number"),
        ("[material.x]\ndensity_kg_m3 = 900\ndensity_range_kg_m3 = [100, 200]\n", r"outside its range"),
        ('[material.x]\nname = "no density"\n', r"material 'x' has no density_kg_m3"),
        ("[material.x]\ndensity = 900\n", r"unknown field\(s\) density"),
        ("[material.x\n", r"shop.toml: not valid TOML"),
    ],
)
def test_bad_user_file_one_line_errors(tmp_path, text, match):
    user = tmp_path / "shop.toml"
    user.write_text(text, encoding="utf-8")
    with pytest.raises(MaterialError, match=match) as info:
        load_materials(user)
    assert "\n" not in str(info.value)


def test_missing_user_file(tmp_path):
    with pytest.raises(MaterialError, match=r"nope.toml: materials file not found"):
        load_materials(tmp_path / "nope.toml")


# -- masses from handbook densities x hand-computed areas ------------------------------


def test_rectangle_mass_weight_and_areal_mass():
    # 100 mm x 50 mm x 2 mm carbon steel; density 7850 kg/m3 (EN 1993-1-1, 3.2.6; from memory).
    # m = 7850e-6 g/mm3 * 5000 mm2 * 2 mm = 78.5 g (hand calculation).
    part = make_part([rect(100, 50, 60, 40)])
    mp = plate_mass(part, "carbon-steel", 2.0)
    assert close(mp.mass_g, 78.5)
    assert close(mp.volume_mm3, 10000.0)
    # weight with standard gravity 9.80665 m/s2 (ISO 80000-3): 0.0785 kg * 9.80665 = 0.769822 N
    assert close(mp.weight_n, 0.0785 * 9.80665)
    assert STANDARD_GRAVITY_M_S2 == 9.80665
    # areal mass 7850 kg/m3 * 0.002 m = 15.7 kg/m2
    assert close(mp.areal_mass_kg_m2, 15.7)
    assert mp.centre_of_mass_mm == pytest.approx((60.0, 40.0, 1.0))


def test_disc_with_holes_mass():
    # Aluminium 6061 disc r = 40 mm with two 10 mm holes, t = 3 mm; density 2700 kg/m3
    # (Aluminum Association, from memory). Area = pi (40^2 - 2 * 5^2) = 1550 pi mm2;
    # m = 2.7e-3 * 1550 pi * 3 = 39.4427 g (hand calculation).
    part = make_part([disc(40), disc(5, 20, 0, sign=-1), disc(5, -20, 0, sign=-1)])
    mp = plate_mass(part, "aluminium-6061", 3.0)
    assert close(mp.mass_g, 2.7e-3 * 1550 * math.pi * 3)


# -- thin-plate inertia: dynamics handbook table -----------------------------------------


def test_rectangular_plate_inertia_matches_handbook():
    # Rectangular prism a x b x t about centroidal axes (dynamics handbook table of mass
    # moments of inertia, e.g. the rectangular-block entry; from memory):
    #   I_z = m (a^2 + b^2) / 12,  I_x = m (b^2 + t^2) / 12,  I_y = m (a^2 + t^2) / 12.
    a, b, t = 120.0, 80.0, 5.0
    part = make_part([rect(a, b, 10, -30)])
    mp = plate_mass(part, "stainless-304", t)
    m = 7900e-6 * a * b * t  # EN 10088-1 density 7900 kg/m3
    assert close(mp.mass_g, m)
    assert close(mp.iz_g_mm2, m * (a * a + b * b) / 12)
    assert close(mp.ix_g_mm2, m * (b * b + t * t) / 12)
    assert close(mp.iy_g_mm2, m * (a * a + t * t) / 12)
    assert mp.ixy_g_mm2 == pytest.approx(0.0, abs=1e-9)


def test_disc_inertia_matches_handbook():
    # Thin disc m r^2 / 2 about its axis; solid cylinder about a diameter m (3 r^2 + t^2) / 12
    # (dynamics handbook table, circular cylinder entry; from memory).
    r, t = 45.0, 1.5
    part = make_part([disc(r, 3, 4)])
    mp = plate_mass(part, "brass", t)
    m = 8440e-6 * math.pi * r * r * t
    assert close(mp.iz_g_mm2, m * r * r / 2)
    assert close(mp.ix_g_mm2, m * (3 * r * r + t * t) / 12)
    assert close(mp.iy_g_mm2, mp.ix_g_mm2)


def test_l_bracket_product_of_inertia_sign_follows_product_of_area():
    # An L (long leg along +x, short leg up +y) has its mass on the lower-left diagonal
    # side of the centroid pattern: the product of area is negative (it is for any L whose
    # legs point along +x and +y from the corner), and ixy_g_mm2 = rho t Ixy keeps the sign.
    # Check value: the Green's-theorem polygon moments in plate_parts (common practice).
    outline = [(0, 0), (80, 0), (80, 10), (10, 10), (10, 60), (0, 60)]
    part = make_part([polygon(outline)])
    assert part.ixy_mm4 < 0
    mp = plate_mass(part, "aluminium-5083", 4.0)
    assert close(mp.ixy_g_mm2, 2660e-6 * 4.0 * part.ixy_mm4)
    assert mp.inertia_tensor_g_mm2()[0, 1] == pytest.approx(-mp.ixy_g_mm2)


# -- uncertainty ------------------------------------------------------------------------


def test_mass_uncertainty_is_quadrature_of_relative_terms():
    # m = rho A t, so (u_m/m)^2 = (u_rho/rho)^2 + (u_A/A)^2 + (u_t/t)^2 (GUM 5.1.6, product of powers).
    part = make_part([rect(100, 50)], area_u=10.0)
    mat = find_material("aluminium-6061")
    mp = plate_mass(part, mat, 2.0, thickness_u_mm=0.02)
    rel = math.sqrt((mat.density_u_kg_m3 / 2700) ** 2 + (10 / 5000) ** 2 + (0.02 / 2) ** 2)
    assert close(mp.mass_u_g, mp.mass_g * rel)
    assert close(mp.weight_u_n, mp.mass_u_g * 1e-3 * 9.80665)


def test_inertia_uncertainty_matches_numerical_derivatives():
    # GUM 5.1.3 note 2 allows sensitivity coefficients by finite differences: perturb each
    # input by its standard uncertainty and combine the changes in quadrature.
    base = make_part([rect(90, 40)], area_u=3.0, moment_u=2.0e3)
    mat = find_material("copper")
    t, ut = 1.5, 0.03
    mp = plate_mass(base, mat, t, thickness_u_mm=ut)

    def ix(part, material, thickness):
        return plate_mass(part, material, thickness).ix_g_mm2

    changes = [
        ix(dataclasses.replace(base, area_mm2=base.area_mm2 + 3.0), mat, t) - mp.ix_g_mm2,
        ix(dataclasses.replace(base, ixx_mm4=base.ixx_mm4 + 2.0e3), mat, t) - mp.ix_g_mm2,
        ix(base, mat, t + ut) - ix(base, mat, t - ut),
        ix(base, dataclasses.replace(mat, density_kg_m3=mat.density_kg_m3 + mat.density_u_kg_m3), t) - mp.ix_g_mm2,
    ]
    changes[2] /= 2
    assert mp.ix_u_g_mm2 == pytest.approx(math.sqrt(sum(c * c for c in changes)), rel=1e-6)


# -- apply_mass on a Measurement ----------------------------------------------------------


def test_apply_mass_fills_parts_and_material_without_touching_input():
    m = make_measurement([make_part([rect(100, 50)], label=1), make_part([disc(20)], label=2)])
    out = apply_mass(m, "steel", 2.0, thickness_u_mm=0.05)
    assert m.parts[0].mass_g is None and m.material is None
    assert close(out.parts[0].mass_g, 78.5)
    assert close(out.parts[1].mass_g, 7850e-6 * math.pi * 400 * 2)
    assert out.parts[0].mass["iz_g_mm2"] == pytest.approx(78.5 * (100**2 + 50**2) / 12)
    assert out.material["key"] == "carbon-steel" and out.material["thickness_mm"] == 2.0
    assert "EN 1993-1-1" in out.material["source"]
    again = Measurement.from_json(out.to_json())
    assert again.parts[1].mass_g == pytest.approx(out.parts[1].mass_g)
    assert again.parts[0].mass["weight_n"] == pytest.approx(out.parts[0].mass["weight_n"])


def test_apply_mass_accepts_a_user_materials_file(tmp_path):
    user = tmp_path / "mine.toml"
    user.write_text(
        '[material.test-sheet]\ndensity_kg_m3 = 1000\nsource = "unit density for the test"\n', encoding="utf-8"
    )
    out = apply_mass(make_measurement([make_part([rect(10, 10)])]), "test sheet", 1.0, materials=user)
    assert close(out.parts[0].mass_g, 0.1)  # 1e-3 g/mm3 * 100 mm2 * 1 mm


@pytest.mark.parametrize(
    "thickness, match",
    [
        (0.0, r"thickness_mm must be a positive number of mm, got 0.0"),
        (-2.0, r"thickness_mm must be a positive number of mm, got -2.0"),
        (float("nan"), r"thickness_mm must be a positive number of mm, got nan"),
        (None, r"thickness_mm is missing; pass the sheet thickness"),
        ("thick", r"thickness_mm must be a number of mm, got 'thick'"),
    ],
)
def test_bad_thickness_is_one_line_option_error(thickness, match):
    m = make_measurement([make_part([rect(10, 10)])])
    with pytest.raises(OptionError, match=match) as info:
        apply_mass(m, "steel", thickness)
    assert "\n" not in str(info.value)


def test_negative_thickness_uncertainty_and_unknown_material():
    part = make_part([rect(10, 10)])
    with pytest.raises(OptionError, match=r"thickness_u_mm must be zero or a positive number of mm, got -0.1"):
        plate_mass(part, "steel", 1.0, thickness_u_mm=-0.1)
    with pytest.raises(MaterialError, match=r"unknown material 'stainles 340' \(close names: stainless-"):
        plate_mass(part, "stainles 340", 1.0)


def test_material_object_can_be_passed_directly():
    unit = Material(
        key="unit",
        name="unit",
        density_kg_m3=1000.0,
        density_u_kg_m3=0.0,
        density_min_kg_m3=1000.0,
        density_max_kg_m3=1000.0,
    )
    assert close(plate_mass(make_part([rect(10, 20)]), unit, 5.0).mass_g, 1.0)
