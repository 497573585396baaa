"""Hostile assembly and materials files (issue 13): limits and one-line errors, never a traceback.

Values that pass as numbers but make no plate (count 10**18, thickness 1e-300 or 1e308,
density 1e308, NaN anchors, a member and an identical cut-out) and absurdly nested TOML are
refused with one-line messages; hypothesis fuzzes the values of assembly members and
material entries: every outcome is either a result with finite figures or a ScanmassError.
Truth for the accepted cases: plate mass m = rho t A (handbook closed form) for the square
part of 100 mm2 below.
"""

from __future__ import annotations

import math
import string

import pytest
from cli_helpers import one_line_error
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from plate_parts import make_measurement, make_part, rect
from typer.testing import CliRunner

from scanmass.cli.app import app
from scanmass.errors import MaterialError, OptionError, ScanmassError
from scanmass.mass.assembly import assemble
from scanmass.mass.materials import load_materials

runner = CliRunner()

MEMBER = '[[member]]\nsource = "a.json"\npart = 1\nmaterial = "{material}"\nthickness_mm = {thickness}\n'


def write_source(folder) -> None:
    """A result JSON with one 10 x 10 mm square plate (area 100 mm2, closed form)."""
    square = make_part([rect(10.0, 10.0, 5.0, 5.0)], label=1)
    (folder / "a.json").write_text(make_measurement([square], "a.png").to_json(), encoding="utf-8")


def write_assembly(folder, body: str, materials: str | None = None):
    write_source(folder)
    if materials is not None:
        (folder / "mat.toml").write_text(materials, encoding="utf-8")
        body = 'materials = "mat.toml"\n' + body
    path = folder / "asm.toml"
    path.write_text(body, encoding="utf-8")
    return path


@pytest.mark.parametrize(
    "extra, match",
    [
        ("count = 1000000000000000000\n", r"count must be a whole number from 1 to 1000000"),
        ("anchor_mm = [nan, 0.0]\n", r"anchor_mm must be \[x, y\] in mm"),
        ("anchor_mm = [1e300, 0.0]\n", r"anchor_mm must be \[x, y\] in mm"),
        ("dx_mm = 1e308\n", r"dx_mm must be a number within"),
        ("z_mm = inf\n", r"z_mm must be a number within"),
        ("rotate_deg = 1e300\n", r"rotate_deg must be a number within"),
    ],
)
def test_member_value_limits(tmp_path, extra, match):
    path = write_assembly(tmp_path, MEMBER.format(material="steel", thickness=2) + extra)
    with pytest.raises(OptionError, match=match) as info:
        assemble(path)
    assert "\n" not in str(info.value)


@pytest.mark.parametrize("thickness", ["1e-300", "1e308", "1e-5", "1e5"])
def test_thickness_limits(tmp_path, thickness):
    path = write_assembly(tmp_path, MEMBER.format(material="steel", thickness=thickness))
    with pytest.raises(OptionError, match="thickness_mm .* is outside 0.001 to 10000 mm"):
        assemble(path)


@pytest.mark.parametrize("density", ["1e308", "1e-300", "200000"])
def test_density_limits(tmp_path, density):
    materials = f"[material.unobtainium]\ndensity_kg_m3 = {density}\n"
    path = write_assembly(tmp_path, MEMBER.format(material="unobtainium", thickness=2), materials)
    with pytest.raises(MaterialError, match="outside 0.1 to 100000 kg/m3"):
        assemble(path)


def test_member_and_identical_cutout_is_one_line(tmp_path):
    body = (
        MEMBER.format(material="steel", thickness=2) + MEMBER.format(material="steel", thickness=2) + "cutout = true\n"
    )
    path = write_assembly(tmp_path, body)
    with pytest.raises(OptionError, match="the cut-outs remove all of the members' mass"):
        assemble(path)
    result = runner.invoke(app, ["assemble", str(path)])
    one_line_error(result, "cut-outs remove all")


def test_accepted_extremes_give_finite_figures(tmp_path):
    # the largest accepted values still combine without overflow; m = rho t A (closed form)
    body = MEMBER.format(material="steel", thickness=10000) + "count = 1000000\ndx_mm = 1e7\nz_mm = -1e7\n"
    result = assemble(write_assembly(tmp_path, body))
    steel = load_materials()["steel"] if "steel" in load_materials() else None
    rho = steel.density_kg_m3 if steel is not None else None
    assert math.isfinite(result.mass_g) and all(math.isfinite(v) for v in result.centre_of_mass_mm)
    if rho is not None:
        assert result.mass_g == pytest.approx(1e6 * rho * 1e-6 * 10000 * 100.0, rel=1e-9)


@pytest.mark.parametrize("what", ["assembly", "materials", "settings"])
def test_deeply_nested_toml_is_one_line(tmp_path, what):
    deep = "x = " + "[" * 20000 + "]" * 20000 + "\n"
    if what == "assembly":
        path = write_assembly(tmp_path, deep)
        with pytest.raises(OptionError, match="nested too deeply"):
            assemble(path)
        one_line_error(runner.invoke(app, ["assemble", str(path)]), "nested too deeply")
    elif what == "materials":
        path = tmp_path / "mat.toml"
        path.write_text(deep, encoding="utf-8")
        with pytest.raises(MaterialError, match="nested too deeply"):
            load_materials(path)
        one_line_error(runner.invoke(app, ["materials", "--materials", str(path)]), "nested too deeply")
    else:
        from scanmass.batch.settings import folder_settings

        (tmp_path / "scanmass.toml").write_text(deep, encoding="utf-8")
        with pytest.raises(OptionError, match="nested too deeply"):
            folder_settings(tmp_path)


# ------------------------------------------------------------------------------------------
# fuzzing: values of assembly members and material entries
# ------------------------------------------------------------------------------------------
def toml_value(value) -> str:
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, int):
        return str(value)
    if isinstance(value, list):
        return "[" + ", ".join(toml_value(v) for v in value) + "]"
    return '"' + str(value).replace("\\", "\\\\").replace('"', '\\"') + '"'


numbers = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.integers(min_value=-(2**63), max_value=2**63 - 1),
    st.sampled_from([0, 1, -1, 1e-300, 1e308, 1e-5, 1e4, 1e6, 1e7, 5e-324]),
)
values = st.one_of(numbers, st.booleans(), st.text(string.printable, max_size=8), st.lists(numbers, max_size=3))


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    member=st.dictionaries(
        st.sampled_from(
            [
                "count",
                "thickness_mm",
                "thickness_u_mm",
                "dx_mm",
                "dy_mm",
                "z_mm",
                "rotate_deg",
                "anchor_mm",
                "cutout",
                "mirror",
            ]
        ),
        values,
        max_size=5,
    ),
    second=st.booleans(),
)
def test_fuzzed_assembly_values_give_a_result_or_one_line(tmp_path, member, second):
    fields = {"source": "a.json", "part": 1, "material": "steel", "thickness_mm": 2.0, **member}
    body = "[[member]]\n" + "".join(f"{k} = {toml_value(v)}\n" for k, v in fields.items())
    if second:  # a second plate so that a fuzzed cut-out may or may not leave mass
        body += MEMBER.format(material="steel", thickness=3)
    path = write_assembly(tmp_path, body)
    try:
        result = assemble(path)
    except ScanmassError as exc:
        assert "\n" not in str(exc)
        return
    figures = [result.mass_g, result.mass_u_g, *result.centre_of_mass_mm, *result.principal_g_mm2]
    assert all(math.isfinite(v) for v in figures) and result.mass_g > 0


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(
    entry=st.dictionaries(
        st.sampled_from(["density_kg_m3", "density_range_kg_m3", "aliases", "name", "source"]), values, max_size=4
    )
)
def test_fuzzed_material_entries_load_or_one_line(tmp_path, entry):
    path = tmp_path / "mat.toml"
    path.write_text(
        "[material.fuzz]\n" + "".join(f"{k} = {toml_value(v)}\n" for k, v in entry.items()), encoding="utf-8"
    )
    try:
        table = load_materials(path)
    except ScanmassError as exc:
        assert "\n" not in str(exc)
        return
    rho = table["fuzz"].density_kg_m3
    assert 0.1 <= rho <= 1e5 and math.isfinite(table["fuzz"].density_u_kg_m3)
