"""The materials, assemble and balance commands through typer's CliRunner."""

from __future__ import annotations

import csv
import io
import json
import math

import pytest
from cli_helpers import one_line_error
from plate_parts import circle_ring, disc, make_measurement, make_part, rect
from typer.testing import CliRunner

from scanmass.cli.app import app
from scanmass.mass.assembly import assemble
from scanmass.testing.scans import SynthPart, circle, render_scan, save_scan

runner = CliRunner()
STEEL = 7850e-6  # g/mm3: carbon steel 7850 kg/m3 (EN 1993-1-1, 3.2.6; from memory)


@pytest.fixture()
def sources(tmp_path):
    """A result JSON with a 100 x 50 plate (part 1) and a disc with an off-centre bore (part 2)."""
    plate = make_part([rect(100, 50, 50, 25)], label=1)
    wheel = make_part([disc(30, 40, 40), disc(4, 41, 40, sign=-1)], label=2, outline=circle_ring(30, 40, 40))
    path = tmp_path / "parts.json"
    path.write_text(make_measurement([plate, wheel], "parts.png").to_json(), encoding="utf-8")
    return path


@pytest.mark.parametrize(
    "command, options",
    [
        ("materials", ["--materials"]),
        ("assemble", ["--json", "--csv", "--materials", "--units"]),
        (
            "balance",
            [
                "--material",
                "--thickness",
                "--thickness-u",
                "--rpm",
                "--grade",
                "--bore-hole",
                "--part",
                "--json",
                "--dpi",
                "--correction-radius",
                "--drill-diameter",
                "--units",
                "Exit status",
            ],
        ),
    ],
)
def test_help_texts(command, options):
    result = runner.invoke(app, [command, "--help"])
    assert result.exit_code == 0
    for option in options:
        assert option in result.output
    # renamed options are gone, and plain flags show no "<bool>" value
    for old in ("--thickness-tol", "--bore ", "--radius", "--drill ", "--printed-x", "--keep-cut", "<bool>"):
        assert old not in result.output


def test_materials_lists_the_table(tmp_path):
    result = runner.invoke(app, ["materials"])
    assert result.exit_code == 0, result.output
    assert "carbon-steel" in result.output and "7850" in result.output
    user = tmp_path / "shop.toml"
    user.write_text('[material.foam-board]\ndensity_kg_m3 = 500\nsource = "supplier datasheet"\n', encoding="utf-8")
    assert "foam-board" in runner.invoke(app, ["materials", "--materials", str(user)]).output


def test_assemble_writes_json_and_csv(sources, tmp_path):
    toml = tmp_path / "asm.toml"
    toml.write_text(
        'units = "mm"\n[[member]]\nname = "base"\nsource = "parts.json"\npart = 1\nmaterial = "steel"\nthickness_mm = 2\n'
        '[[member]]\nname = "wheel"\nsource = "parts.json"\npart = 2\nmaterial = "steel"\nthickness_mm = 2\nz_mm = 2\n',
        encoding="utf-8",
    )
    out_json, out_csv = tmp_path / "a.json", tmp_path / "a.csv"
    result = runner.invoke(app, ["assemble", str(toml), "--json", str(out_json), "--csv", str(out_csv)])
    assert result.exit_code == 0, result.output
    assert "caution" in result.output and "base" in result.output
    doc = json.loads(out_json.read_text())
    assert doc["mass_g"] == pytest.approx(assemble(toml).mass_g, rel=1e-12)
    # hand calculation: 7850e-6 * 2 * (5000 + pi (900 - 16)) g
    assert doc["mass_g"] == pytest.approx(STEEL * 2 * (5000 + math.pi * 884), rel=1e-12)
    rows = list(csv.DictReader(io.StringIO(out_csv.read_text())))
    assert [r["row"] for r in rows] == ["member", "member", "total"]
    stdout = runner.invoke(app, ["assemble", str(toml), "--json", "-"])
    assert json.loads(stdout.stdout)["schema"] == "scanmass.assembly/2"
    # --units in: the same rows in inches (1 in = 25.4 mm exactly, by definition) and g·in²
    inch_csv = tmp_path / "a-in.csv"
    result = runner.invoke(app, ["assemble", str(toml), "--csv", str(inch_csv), "--units", "in"])
    assert result.exit_code == 0, result.output
    assert "CoM x, y, z in" in result.output and "g·in²" in result.output and "g·mm²" not in result.output
    inch = list(csv.DictReader(io.StringIO(inch_csv.read_text())))
    assert "com_x_mm" not in inch[0] and "thickness_mm" not in inch[0]
    for mm_row, in_row in zip(rows, inch):
        assert float(in_row["mass_g"]) == float(mm_row["mass_g"])
        assert float(in_row["thickness_in"] or 0) * 25.4 == pytest.approx(float(mm_row["thickness_mm"] or 0), rel=1e-12)
        for axis in "xyz":
            assert float(in_row[f"com_{axis}_in"]) * 25.4 == pytest.approx(float(mm_row[f"com_{axis}_mm"]), rel=1e-12)
        assert float(in_row["inertia_zz_g_in2"]) * 25.4**2 == pytest.approx(
            float(mm_row["inertia_zz_g_mm2"]), rel=1e-12
        )


def test_assemble_errors_are_one_line(sources, tmp_path):
    toml = tmp_path / "asm.toml"
    toml.write_text(
        'units = "inch"\n[[member]]\nsource = "parts.json"\nmaterial = "steel"\nthickness_mm = 2\n', encoding="utf-8"
    )
    one_line_error(runner.invoke(app, ["assemble", str(toml)]), "asm.toml", "units = 'inch' is not supported")
    toml.write_text(
        '[[member]]\nsource = "parts.json"\npart = 9\nmaterial = "steel"\nthickness_mm = 2\n', encoding="utf-8"
    )
    one_line_error(runner.invoke(app, ["assemble", str(toml)]), "has no part 9")
    toml.write_text(
        '[[member]]\nsource = "parts.json"\npart = 1\nmaterial = "steel"\nthickness_mm = 2\n', encoding="utf-8"
    )
    one_line_error(runner.invoke(app, ["assemble", str(toml), "--json", str(sources)]), "parts.json")


def test_balance_from_a_result_json(sources):
    result = runner.invoke(
        app,
        [
            "balance",
            str(sources),
            "--part",
            "2",
            "--material",
            "steel",
            "--thickness",
            "2",
            "--rpm",
            "3000",
            "--grade",
            "6.3",
            "--json",
            "-",
        ],
    )
    assert result.exit_code == 1, result.output  # the part fails the grade: exit status 1 (documented)
    doc = json.loads(result.stdout)
    # closed form U = m_disc * s (see tests/test_balance.py): 7850e-6 * pi 30^2 * 2 * 1
    assert doc["unbalance_gmm"] == pytest.approx(STEEL * math.pi * 900 * 2 * 1.0, rel=1e-12)
    assert doc["passes"] is False and doc["heavy_angle_deg"] == pytest.approx(180.0)
    shown = runner.invoke(app, ["balance", str(sources), "--part", "2", "--material", "steel", "--thickness", "2"])
    assert shown.exit_code == 0 and "not judged" in shown.output and "balancing machine" in shown.output


def test_balance_of_a_scanned_disc(tmp_path):
    # A synthetic 300 dpi scan of a 60 mm disc whose 8 mm bore sits 1 mm off-centre; truth
    # U = m_disc s = 7850e-6 * pi 30^2 * 3 * 1 = 66.58 g mm (closed form above). The scan's
    # polygons are inscribed, so allow the stated uncertainty (3 sigma) plus 0.5 %.
    scan = render_scan(
        [SynthPart(circle(40.0, 40.0, 30.0), [circle(41.0, 40.0, 4.0)])],
        dpi=300,
        size_mm=(80, 80),
        blur_px=0.9,
        noise=0.005,
        seed=5,
    )
    image = save_scan(scan, tmp_path / "wheel.png")
    result = runner.invoke(
        app, ["balance", str(image), "--dpi", "300", "--material", "steel", "--thickness", "3", "--json", "-"]
    )
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    truth = STEEL * math.pi * 900 * 3 * 1.0
    assert abs(doc["unbalance_gmm"] - truth) <= 3 * doc["unbalance_u_gmm"] + 0.005 * truth


def test_balance_errors_are_one_line(sources):
    args = ["balance", str(sources)]
    one_line_error(
        runner.invoke(app, args + ["--part", "1", "--material", "steel", "--thickness", "2"]),
        "part 1 has no hole to spin about",
    )
    one_line_error(runner.invoke(app, args + ["--part", "2", "--material", "steel"]), "--thickness")
    one_line_error(
        runner.invoke(app, args + ["--part", "2", "--material", "stel", "--thickness", "2"]),
        "unknown material 'stel'",
        "close names",
    )
    one_line_error(
        runner.invoke(app, args + ["--part", "2", "--material", "steel", "--thickness", "0"]),
        "thickness_mm must be a positive number",
    )
    one_line_error(runner.invoke(app, args + ["--material", "steel", "--thickness", "2"]), "has 2 parts (1, 2)")
    one_line_error(
        runner.invoke(app, args + ["--part", "2", "--material", "steel", "--thickness", "2", "--rpm", "3000"]),
        "give both the speed",
    )


def test_materials_name_a_source_and_never_say_from_memory():
    from scanmass.mass.materials import NOT_CHECKED, load_materials

    result = CliRunner().invoke(app, ["materials"], env={"COLUMNS": "400"})
    assert result.exit_code == 0 and "from memory" not in result.output
    for key, mat in load_materials().items():
        assert mat.source, key  # every density names where it comes from
        assert mat.checked or mat.source_text.endswith(NOT_CHECKED), key


def test_balance_without_a_fitting_correction_shows_no_after_correction_figures(sources):
    import dataclasses

    from rich.console import Console

    from scanmass.cli.mass_tables import balance_table
    from scanmass.mass.balance import balance_measurement
    from scanmass.measurement import read_result

    res = balance_measurement(read_result(sources), "steel", 2.0, part=2, rpm=3000, grade=6.3)
    assert res.correction_radius_mm is not None

    def text(r) -> str:
        console = Console(width=300, record=True)
        console.print(balance_table(r))
        return console.export_text()

    if res.correction_fits is not False:
        assert "U after correction" in text(res)
    shown = text(dataclasses.replace(res, correction_fits=False))
    assert "hole fits in material" in shown and "NO" in shown
    assert "U after correction" not in shown and "remove at" not in shown
    # one unit for every offset: the permissible offset in mm like the offset itself
    assert "permissible offset, mm" in shown and "µm" not in shown
    inches = Console(width=300, record=True)
    inches.print(balance_table(res, "in"))
    assert "permissible offset, in" in inches.export_text()


def test_measure_names_the_material_it_used(tmp_path):
    scan = render_scan([SynthPart(circle(20.0, 20.0, 10.0))], dpi=300, size_mm=(40, 40), seed=3)
    image = save_scan(scan, tmp_path / "disc.png")
    result = runner.invoke(
        app, ["measure", str(image), "--material", "steel", "--thickness", "2", "--thickness-u", "0.05"]
    )
    assert result.exit_code == 0, result.output
    out = " ".join(result.output.split())
    # the alias "steel" resolved visibly to the carbon-steel entry and its density (7850 kg/m3)
    assert "material 'steel' = Carbon steel" in out and "(carbon-steel)" in out and "7850" in out


def test_report_includes_balance_and_assembly_json(sources, tmp_path):
    toml = tmp_path / "asm.toml"
    toml.write_text(
        f'units = "mm"\n[[member]]\nname = "base"\nsource = "{sources.name}"\npart = 1\nmaterial = "steel"\n'
        "thickness_mm = 2\n",
        encoding="utf-8",
    )
    (tmp_path / "asm.toml").replace(sources.parent / "asm.toml")
    asm_json, bal_json = tmp_path / "asm.json", tmp_path / "bal.json"
    assert runner.invoke(app, ["assemble", str(sources.parent / "asm.toml"), "--json", str(asm_json)]).exit_code == 0
    args = ["balance", str(sources), "--part", "2", "--material", "steel", "--thickness", "2"]
    assert runner.invoke(app, [*args, "--rpm", "3000", "--grade", "6.3", "--json", str(bal_json)]).exit_code == 1
    html = tmp_path / "r.html"
    result = runner.invoke(app, ["report", str(sources), str(bal_json), str(asm_json), "--html", str(html)])
    assert result.exit_code == 0, result.output
    page = html.read_text(encoding="utf-8")
    assert 'section class="balance"' in page and 'data-verdict="fail"' in page and "Balance fail" in page
    assert 'section class="assembly"' in page and "Product of inertia Pxy (same sign as Ixy)" in page
