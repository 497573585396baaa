"""Assemblies: composite rule and parallel-axis theorem against one-outline results and
hand calculations."""

from __future__ import annotations

import csv
import io
import json
import math

import numpy as np
import pytest
from plate_parts import disc, make_measurement, make_part, polygon, rect

import scanmass
from scanmass.errors import MaterialError, OptionError
from scanmass.mass.assembly import Member, assemble, combine_members
from scanmass.mass.materials import find_material
from scanmass.mass.plate import plate_mass

REL = 1e-10  # the two routes differ only by rounding


def tensor_of(mp) -> np.ndarray:
    """The plate's inertia tensor from plate_mass (tested against handbook tables in test_mass)."""
    return mp.inertia_tensor_g_mm2()


def member(part, material="aluminium-6061", thickness=3.0, **kw) -> Member:
    return Member(part=part, material=find_material(material), thickness_mm=thickness, **kw)


# -- composite L-bracket: as an assembly and as one outline ------------------------------

L_OUTLINE = [(0, 0), (80, 0), (80, 10), (10, 10), (10, 60), (0, 60)]


def test_l_outline_reference_area_and_centroid_from_shapely():
    # Reference library: shapely's area and centroid of the same polygon.
    shapely = pytest.importorskip("shapely")
    poly = shapely.Polygon(L_OUTLINE)
    piece = polygon(L_OUTLINE)
    assert piece.area == pytest.approx(poly.area, rel=1e-12)
    assert (piece.cx, piece.cy) == pytest.approx((poly.centroid.x, poly.centroid.y), rel=1e-12)


def test_l_bracket_as_two_plates_equals_one_outline():
    # One measured outline: the L polygon (Green's-theorem moments), 3 mm aluminium 6061.
    whole = plate_mass(make_part([polygon(L_OUTLINE)]), "aluminium-6061", 3.0)
    # The same bracket as two plates: an 80 x 10 strip, and a 50 x 10 strip drawn along x
    # and turned 90 degrees about its own centroid (anchor at its centroid, placed at (5, 35)).
    foot = member(make_part([rect(80, 10, 40, 5)]))
    leg = member(make_part([rect(50, 10, 0, 0)]), rotate_deg=90.0, dx_mm=5.0, dy_mm=35.0)
    result = combine_members([foot, leg])
    assert result.mass_g == pytest.approx(whole.mass_g, rel=REL)
    assert result.centre_of_mass_mm == pytest.approx(whole.centre_of_mass_mm, rel=REL)
    np.testing.assert_allclose(result.inertia_g_mm2, tensor_of(whole), rtol=REL, atol=1e-6)


def test_plate_with_holes_as_cutouts_equals_one_outline():
    # 120 x 80 plate with a 30 x 20 window, a 10 x 40 slot and a 16 mm round hole.
    plate = rect(120, 80, 60, 40)
    window = rect(30, 20, 25, 55, sign=-1)
    slot = rect(10, 40, 95, 30, sign=-1)
    hole = disc(8, 50, 20, sign=-1)
    whole = plate_mass(make_part([plate, window, slot, hole]), "stainless-316", 1.5)

    def positive(piece):
        piece.sign = 1.0
        return make_part([piece])

    members = [member(make_part([plate]), "stainless-316", 1.5)] + [
        member(positive(p), "stainless-316", 1.5, cutout=True) for p in (window, slot, hole)
    ]
    result = combine_members(members)
    assert result.mass_g == pytest.approx(whole.mass_g, rel=REL)
    assert result.centre_of_mass_mm == pytest.approx(whole.centre_of_mass_mm, rel=REL)
    np.testing.assert_allclose(result.inertia_g_mm2, tensor_of(whole), rtol=REL, atol=1e-6)
    assert [m.mass_g < 0 for m in result.members] == [False, True, True, True]


# -- stack of plates: known 3D centre of mass ------------------------------------------


def test_stack_of_plates_centre_of_mass_and_polar_inertia():
    # Hand calculation with handbook densities (kg/m3 -> g/mm3 x 1e-6):
    #   steel 100 x 100 x 2 at z 0..2,        centre (0, 0, 1):     m1 = 7850e-6 * 10000 * 2 = 157 g
    #   aluminium 6061 60 x 60 x 5 at z 2..7, centre (10, -5, 4.5): m2 = 2700e-6 * 3600 * 5 = 48.6 g
    #   acrylic 40 x 20 x 3 at z 7..10,       centre (-20, 15, 8.5): m3 = 1190e-6 * 800 * 3 = 2.856 g
    # centre of mass = sum m_i c_i / sum m_i (point-mass rule, statics; common practice).
    members = [
        member(make_part([rect(100, 100)]), "carbon-steel", 2.0, z_mm=0.0),
        member(make_part([rect(60, 60)]), "aluminium-6061", 5.0, dx_mm=10, dy_mm=-5, z_mm=2.0),
        member(make_part([rect(40, 20)]), "acrylic", 3.0, dx_mm=-20, dy_mm=15, z_mm=7.0),
    ]
    m = np.array([157.0, 48.6, 2.856])
    c = np.array([[0, 0, 1.0], [10, -5, 4.5], [-20, 15, 8.5]])
    total = m.sum()
    com = (m[:, None] * c).sum(axis=0) / total
    result = combine_members(members)
    assert result.mass_g == pytest.approx(total, rel=1e-12)
    assert result.centre_of_mass_mm == pytest.approx(tuple(com), rel=1e-12)
    # I_zz = sum [ m_i (a_i^2 + b_i^2) / 12 + m_i (dx_i^2 + dy_i^2) ] (plate table + parallel axis)
    sides = np.array([[100, 100], [60, 60], [40, 20]])
    d = c - com
    izz = (m * (sides**2).sum(axis=1) / 12 + m * (d[:, 0] ** 2 + d[:, 1] ** 2)).sum()
    assert result.inertia_g_mm2[2, 2] == pytest.approx(izz, rel=1e-12)
    # I_xz = -sum m_i dx_i dz_i (the plates' own products with z vanish)
    assert result.inertia_g_mm2[0, 2] == pytest.approx(-(m * d[:, 0] * d[:, 2]).sum(), rel=1e-12)


def test_rotating_the_whole_assembly_rotates_the_tensor():
    # Invariance: turning every member by theta about the origin turns the tensor, I' = R I R^T,
    # and leaves the principal values unchanged.
    parts = [make_part([polygon(L_OUTLINE)]), make_part([rect(30, 12, 50, 40)])]
    theta = 30.0
    c, s = math.cos(math.radians(theta)), math.sin(math.radians(theta))
    rot = np.array([[c, -s, 0], [s, c, 0], [0, 0, 1]])
    base = combine_members([member(parts[0]), member(parts[1], z_mm=3.0)])
    turned = combine_members([member(parts[0], rotate_deg=theta), member(parts[1], rotate_deg=theta, z_mm=3.0)])
    np.testing.assert_allclose(turned.inertia_g_mm2, rot @ base.inertia_g_mm2 @ rot.T, rtol=1e-10, atol=1e-6)
    assert turned.principal_g_mm2 == pytest.approx(base.principal_g_mm2, rel=1e-10)
    axes = turned.principal_axes
    np.testing.assert_allclose(axes @ axes.T, np.eye(3), atol=1e-12)
    assert np.linalg.det(axes) == pytest.approx(1.0)
    for value, axis in zip(turned.principal_g_mm2, axes):
        np.testing.assert_allclose(turned.inertia_g_mm2 @ axis, value * axis, rtol=1e-9, atol=1e-6)


def test_mirror_flips_the_product_of_inertia_and_count_multiplies():
    part = make_part([polygon(L_OUTLINE)])
    plain = combine_members([member(part)])
    flipped = combine_members([member(part, mirror="x")])
    assert flipped.inertia_g_mm2[0, 1] == pytest.approx(-plain.inertia_g_mm2[0, 1], rel=1e-12)
    assert flipped.centre_of_mass_mm[0] == pytest.approx(-plain.centre_of_mass_mm[0], rel=1e-12)
    triple = combine_members([member(part, count=3)])
    assert triple.mass_g == pytest.approx(3 * plain.mass_g, rel=1e-12)
    np.testing.assert_allclose(triple.inertia_g_mm2, 3 * plain.inertia_g_mm2, rtol=1e-12)


# -- uncertainty ------------------------------------------------------------------------


def test_single_member_mass_uncertainty_matches_plate_mass():
    part = make_part([rect(100, 50)], area_u=5.0)
    single = combine_members([member(part, thickness_u_mm=0.03)])
    mp = plate_mass(part, "aluminium-6061", 3.0, thickness_u_mm=0.03)
    assert single.mass_u_g == pytest.approx(mp.mass_u_g, rel=1e-9)  # linear in each input


def test_shared_density_and_sheet_errors_add_linearly():
    # Two separately measured plates of one material and sheet share the density and
    # thickness errors (correlation +1: the uncertainties add linearly, GUM 5.2.2 note 1);
    # plates of different materials add in quadrature.
    a, b = make_part([rect(100, 50)]), make_part([rect(100, 50)])
    one = combine_members([member(a, thickness_u_mm=0.03)]).mass_u_g
    same = combine_members([member(a, thickness_u_mm=0.03), member(b, thickness_u_mm=0.03, z_mm=3)]).mass_u_g
    assert same == pytest.approx(2 * one, rel=1e-9)
    steel = member(b, "carbon-steel", 3.0)
    u_steel = combine_members([steel]).mass_u_g
    mixed = combine_members([member(a), steel]).mass_u_g
    u_al = combine_members([member(a)]).mass_u_g
    assert mixed == pytest.approx(math.hypot(u_al, u_steel), rel=1e-9)


# -- assembly files -----------------------------------------------------------------------


def write_sources(tmp_path):
    """Two result JSONs: an L bracket (part 1) and a washer-like disc with a bore (part 2)."""
    bracket = make_part([polygon(L_OUTLINE)], label=1, area_u=2.0, centroid_u=0.01)
    washer = make_part([disc(15), disc(4, 0, 0, sign=-1)], label=2)
    (tmp_path / "a.json").write_text(make_measurement([bracket, washer], "a.png").to_json(), encoding="utf-8")
    return bracket, washer


def test_toml_assembly_matches_direct_members(tmp_path):
    bracket, washer = write_sources(tmp_path)
    (tmp_path / "asm.toml").write_text(
        'units = "mm"\nname = "bracket with washers"\n'
        '[[member]]\nname = "bracket"\nsource = "a.json"\npart = 1\nmaterial = "6061"\nthickness_mm = 3\n'
        '[[member]]\nname = "washers"\nsource = "a.json"\npart = 2\nmaterial = "brass"\nthickness_mm = 1.0\n'
        'count = 2\nanchor = "hole 1"\ndx_mm = 70\ndy_mm = 5\nz_mm = 3\n',
        encoding="utf-8",
    )
    result = assemble(tmp_path / "asm.toml")
    direct = combine_members(
        [
            member(bracket, "aluminium-6061", 3.0),
            member(washer, "brass", 1.0, count=2, anchor_mm=(0.0, 0.0), dx_mm=70, dy_mm=5, z_mm=3),
        ]
    )
    assert result.mass_g == pytest.approx(direct.mass_g, rel=1e-12)
    assert result.centre_of_mass_mm == pytest.approx(direct.centre_of_mass_mm, rel=1e-12)
    assert result.name == "bracket with washers"
    doc = json.loads(result.to_json())
    assert doc["schema"] == "scanmass.assembly/2"
    assert doc["members"][1]["count"] == 2 and doc["mass_u_g"] > 0
    assert "lifting" in doc["cautions"]
    rows = list(csv.DictReader(io.StringIO(result.to_csv())))
    assert [r["row"] for r in rows] == ["member", "member", "total"]
    assert float(rows[-1]["mass_g"]) == pytest.approx(result.mass_g)


def test_image_members_are_measured_once_with_their_dpi(tmp_path, monkeypatch):
    calls = []
    plate = make_part([rect(50, 50)], label=1)

    def fake_measure(path, **kw):
        calls.append((path, kw))
        return make_measurement([plate], str(path))

    monkeypatch.setattr(scanmass, "measure", fake_measure, raising=False)
    (tmp_path / "scan.png").write_bytes(b"not really an image; measure is replaced")
    (tmp_path / "asm.toml").write_text(
        '[[member]]\nsource = "scan.png"\ndpi = 600\nmaterial = "steel"\nthickness_mm = 1\n'
        '[[member]]\nsource = "scan.png"\ndpi = 600\nmaterial = "steel"\nthickness_mm = 1\nz_mm = 1\n',
        encoding="utf-8",
    )
    result = assemble(tmp_path / "asm.toml")
    assert len(calls) == 1 and calls[0][1] == {"dpi": 600.0}
    assert result.mass_g == pytest.approx(2 * 7850e-6 * 2500 * 1)


@pytest.mark.parametrize(
    "body, error, match",
    [
        (
            'units = "in"\n[[member]]\nsource = "a.json"\nmaterial = "steel"\nthickness_mm = 1\n',
            OptionError,
            r"member 1: thickness_mm in a file with units = \"in\"; write thickness_in",
        ),
        (
            '[[member]]\nsource = "missing.json"\nmaterial = "steel"\nthickness_mm = 1\n',
            OptionError,
            r"member 1: source 'missing.json' not found next to the assembly file",
        ),
        (
            '[[member]]\nname = "lid"\nsource = "a.json"\npart = 7\nmaterial = "steel"\nthickness_mm = 1\n',
            OptionError,
            r"member 1 \('lid'\): a.json: has no part 7 \(parts: 1, 2\)",
        ),
        (
            '[[member]]\nsource = "a.json"\nmaterial = "steel"\nthickness_mm = 1\n',
            OptionError,
            r"member 1: a.json: has 2 parts \(1, 2\); choose one by its label",
        ),
        (
            '[[member]]\nsource = "a.json"\npart = 1\nmaterial = "stainles"\nthickness_mm = 1\n',
            MaterialError,
            r"member 1: unknown material 'stainles' \(close names: stainless-",
        ),
        (
            '[[member]]\nsource = "a.json"\npart = 1\nmaterial = "steel"\nthickness_mm = 0\n',
            OptionError,
            r"member 1: thickness_mm must be a positive number of mm, got 0",
        ),
        (
            '[[member]]\nsource = "a.json"\npart = 1\nmaterial = "steel"\n',
            OptionError,
            r"member 1: thickness_mm is missing",
        ),
        (
            '[[member]]\nsource = "a.json"\npart = 1\nmaterial = "steel"\nthickness_mm = 1\nrotation = 5\n',
            OptionError,
            r"member 1: unknown key\(s\) rotation",
        ),
        (
            '[[member]]\nsource = "a.json"\npart = 1\nmaterial = "steel"\nthickness_mm = 1\nmirror = "z"\n',
            OptionError,
            r"mirror must be \"x\" \(negate x\) or \"y\"",
        ),
        (
            '[[member]]\nsource = "a.json"\npart = 1\nmaterial = "steel"\nthickness_mm = 1\nanchor = "hole 3"\n',
            OptionError,
            r"anchor 'hole 3' names no hole of part 1 \(holes: none\)",
        ),
        (
            '[[member]]\nsource = "a.json"\npart = 2\nmaterial = "steel"\nthickness_mm = 1\ncutout = true\n',
            OptionError,
            r"the cut-outs outweigh the members",
        ),
        (
            '[[member]]\nsource = "a.json"\npart = 1\nmaterial = "steel"\nthickness_mm = 1\n'
            '[[member]]\nsource = "a.json"\npart = 2\nmaterial = "steel"\nthickness_mm = 1\ncutout = true\nz_mm = 40\n',
            OptionError,
            r"the combined inertia is not physical \(a principal moment is negative\)",
        ),
        ('name = "empty"\n', OptionError, r"no members; add one \[\[member\]\] table per part"),
    ],
)
def test_bad_assembly_files_give_one_line_errors(tmp_path, body, error, match):
    write_sources(tmp_path)
    (tmp_path / "asm.toml").write_text(body, encoding="utf-8")
    with pytest.raises(error, match=match) as info:
        assemble(tmp_path / "asm.toml")
    assert "\n" not in str(info.value)


def test_missing_assembly_file(tmp_path):
    with pytest.raises(OptionError, match=r"nope.toml: assembly file not found"):
        assemble(tmp_path / "nope.toml")


def test_inch_assembly_file_equals_the_mm_file(tmp_path):
    # 1 in = 25.4 mm exactly (international yard and pound agreement, 1959)
    write_sources(tmp_path)
    common = '[[member]]\nname = "bracket"\nsource = "a.json"\npart = 1\nmaterial = "6061"\n'
    (tmp_path / "mm.toml").write_text(
        f'units = "mm"\n{common}thickness_mm = 3.175\ndx_mm = 25.4\ndy_mm = -12.7\nz_mm = 6.35\n', encoding="utf-8"
    )
    (tmp_path / "in.toml").write_text(
        f'units = "in"\n{common}thickness_in = 0.125\ndx_in = 1\ndy_in = -0.5\nz_in = 0.25\n', encoding="utf-8"
    )
    a, b = assemble(tmp_path / "mm.toml"), assemble(tmp_path / "in.toml")
    assert b.mass_g == pytest.approx(a.mass_g, rel=1e-12)
    assert b.centre_of_mass_mm == pytest.approx(a.centre_of_mass_mm, rel=1e-12)


def test_assembly_product_of_inertia_has_the_sign_of_the_part_ixy(tmp_path):
    # one L bracket alone: its product of inertia ∫(x - xc)(y - yc) dm = rho t Ixy (thin-plate
    # relation, any dynamics handbook; common practice), so both carry the same sign
    bracket, _ = write_sources(tmp_path)
    result = combine_members([member(bracket, "aluminium-6061", 3.0)])
    rho_t = find_material("aluminium-6061").density_g_mm3 * 3.0
    doc = json.loads(result.to_json())
    assert bracket.ixy_mm4 < 0  # the L of L_OUTLINE: legs along +x and +y from the corner
    assert doc["products_g_mm2"]["xy"] == pytest.approx(rho_t * bracket.ixy_mm4, rel=1e-9)
    row = list(csv.DictReader(io.StringIO(result.to_csv())))[-1]
    assert float(row["product_xy_g_mm2"]) == pytest.approx(rho_t * bracket.ixy_mm4, rel=1e-9)
