"""The command line through typer's CliRunner: outputs, exit codes, one-line errors.

Expected figures: the exact polygons the scans are rendered from (areas by closed forms:
disc pi r^2, rectangle b h; statics handbook section table, common practice).
"""

from __future__ import annotations

import json
import math
import os
import re
from pathlib import Path

import numpy as np
import pytest
from cli_helpers import one_line_error
from PIL import Image
from typer.testing import CliRunner

from scanmass.cli.app import app
from scanmass.measurement import Measurement
from scanmass.testing.scans import SynthPart, circle, rectangle, render_scan, save_scan

runner = CliRunner()


@pytest.fixture(scope="module")
def scan_png(tmp_path_factory) -> Path:
    folder = tmp_path_factory.mktemp("scans")
    parts = [SynthPart(rectangle(8.0, 9.0, 30.0, 20.0), [circle(23.0, 19.0, 4.0)]), SynthPart(circle(60.0, 20.0, 9.0))]
    scan = render_scan(parts, dpi=300, size_mm=(80, 40), blur_px=0.9, noise=0.005, seed=21)
    return save_scan(scan, folder / "plate.png")


def test_measure_writes_json_csv_overlay(scan_png, tmp_path):
    out_json, out_csv, out_png = tmp_path / "r.json", tmp_path / "r.csv", tmp_path / "o.png"
    result = runner.invoke(
        app, ["measure", str(scan_png), "--json", str(out_json), "--csv", str(out_csv), "--overlay", str(out_png)]
    )
    assert result.exit_code == 0, result.output
    m = Measurement.from_json(out_json.read_text())
    areas = sorted(p.area_mm2 for p in m.parts)
    # truth: plate 30 x 20 minus a disc of r = 4 (600 - 16 pi); disc r = 9 (81 pi); closed forms
    assert areas == pytest.approx(sorted([600 - 16 * math.pi, 81 * math.pi]), rel=1e-3)
    rows = out_csv.read_text().splitlines()
    assert rows[0].startswith("file,part,area_mm2,area_u_mm2,perimeter_mm,perimeter_u_mm,centroid_x_mm")
    assert len(rows) == 3
    with Image.open(out_png) as im:
        assert im.format == "PNG" and im.size[0] > 100
    assert "part 1" in result.output and "Area, mm²" in result.output


def test_measure_json_to_stdout(scan_png):
    result = runner.invoke(app, ["measure", str(scan_png), "--json", "-"])
    assert result.exit_code == 0
    doc = json.loads(result.stdout)
    assert doc["schema"] == "scanmass.result/2" and len(doc["parts"]) == 2


def test_measure_with_material_adds_mass(scan_png):
    result = runner.invoke(
        app, ["measure", str(scan_png), "--json", "-", "--material", "aluminium-6082", "--thickness", "2"]
    )
    assert result.exit_code == 0, result.output
    doc = json.loads(result.stdout)
    assert all(p["mass_g"] > 0 and p["mass_u_g"] > 0 for p in doc["parts"])


def test_help_and_version():
    assert runner.invoke(app, ["--version"]).output.startswith("scanmass ")
    result = runner.invoke(app, ["measure", "--help"], env={"COLUMNS": "200"})
    assert result.exit_code == 0 and "--dpi" in result.output
    out = result.output
    for new in ("--keep-clipped", "--thickness-u", "--check-bar-x", "--check-bar-y", "--units", "parallax"):
        assert new in out
    for old in ("--keep-cut", "--thickness-tol", "--printed-x", "--printed-y", "<bool>"):
        assert old not in out
    assert "standard uncertainty" in out.split("--thickness-u", 1)[1].split("--", 1)[0].lower()
    lens = runner.invoke(app, ["lens", "--help"]).output
    assert "--json" in lens and "--out" not in lens  # --out names a folder in every command
    export = runner.invoke(app, ["batch-export", "--help"]).output
    assert "--csv" in export and "--jsonl" in export and "--out" not in export


def test_measure_several_images_and_a_folder(scan_png, tmp_path):
    other = tmp_path / "again.png"
    other.write_bytes(scan_png.read_bytes())
    out_csv = tmp_path / "both.csv"
    result = runner.invoke(app, ["measure", str(scan_png), str(other), "--csv", str(out_csv)])
    assert result.exit_code == 0, result.output
    assert result.output.count("Area, mm²") == 2  # one table per image
    rows = out_csv.read_text().splitlines()
    assert len(rows) == 1 + 2 * 2 and rows[0].startswith("file,part,area_mm2")
    one_line_error(runner.invoke(app, ["measure", str(tmp_path)]), "is a folder", "scanmass batch")
    one_line_error(
        runner.invoke(app, ["measure", str(scan_png), str(other), "--json", str(tmp_path / "r.json")]),
        "scanmass batch",
    )


def test_piped_table_keeps_each_value_with_its_uncertainty(scan_png):
    # CliRunner's output is not a terminal: the table gets room, and "value ± u" stays on one line
    result = runner.invoke(app, ["measure", str(scan_png)])
    assert result.exit_code == 0
    for line in result.output.splitlines():
        assert not line.rstrip(" │|").endswith("±"), line  # a value split from its uncertainty
        assert not re.match(r"^[│|\s]*[0-9.]+\s*│\s*$", line), line  # an uncertainty alone on a line
    assert re.search(r"\d ± \d", result.output.replace("\u00a0", " "))


def test_measure_in_inches(scan_png, tmp_path):
    mm_csv, in_csv = tmp_path / "mm.csv", tmp_path / "in.csv"
    assert runner.invoke(app, ["measure", str(scan_png), "--csv", str(mm_csv), "-q"]).exit_code == 0
    result = runner.invoke(app, ["measure", str(scan_png), "--csv", str(in_csv), "--units", "in"])
    assert result.exit_code == 0, result.output
    assert "Area, in²" in result.output and "Area, mm²" not in result.output
    a = mm_csv.read_text().splitlines()[1].split(",")
    b = in_csv.read_text().splitlines()[1].split(",")
    # column 2 is the area: mm2 / 25.4^2 = in2 (1 in = 25.4 mm exactly, 1959 agreement)
    assert float(b[2]) == pytest.approx(float(a[2]) / 25.4**2, rel=1e-12)
    one_line_error(runner.invoke(app, ["measure", str(scan_png), "--units", "cm"]), "--units")


def test_every_command_has_help_text():
    import typer.main

    group = typer.main.get_command(app)
    for name, command in group.commands.items():
        assert command.help, f"command {name} lacks help text"
        for param in command.params:
            if param.param_type_name == "option" and param.name not in ("help",):
                assert getattr(param, "help", None), f"{name} option {param.name} lacks help"


@pytest.mark.parametrize(
    "content, suffix, needles",
    [
        (b"", ".png", ["empty"]),
        (b"this is not an image at all" * 10, ".png", ["not"]),
    ],
)
def test_bad_files(tmp_path, content, suffix, needles):
    path = tmp_path / f"bad{suffix}"
    path.write_bytes(content)
    line = one_line_error(runner.invoke(app, ["measure", str(path)]), str(path))
    for n in needles:
        assert n in line.lower()


def test_truncated_file(scan_png, tmp_path):
    data = scan_png.read_bytes()
    path = tmp_path / "cut.png"
    path.write_bytes(data[: len(data) // 2])
    one_line_error(runner.invoke(app, ["measure", str(path)]), str(path))


def test_missing_file(tmp_path):
    one_line_error(runner.invoke(app, ["measure", str(tmp_path / "nope.png")]), "nope.png")


def test_no_scale(tmp_path):
    scan = render_scan([SynthPart(circle(20, 20, 8))], dpi=300, size_mm=(40, 40), seed=1)
    path = save_scan(scan, tmp_path / "nodpi.png", dpi="omit")
    one_line_error(runner.invoke(app, ["measure", str(path)]), str(path), "--dpi")


def test_default_72_dpi_is_unknown(tmp_path):
    scan = render_scan([SynthPart(circle(20, 20, 8))], dpi=300, size_mm=(40, 40), seed=1)
    path = save_scan(scan, tmp_path / "d72.jpg", dpi=72)
    one_line_error(runner.invoke(app, ["measure", str(path)]), str(path), "--dpi")


@pytest.mark.parametrize("dpi", ["0", "-300", "nan", "1e9"])
def test_absurd_dpi(scan_png, dpi):
    one_line_error(runner.invoke(app, ["measure", str(scan_png), "--dpi", dpi]), "dpi")


@pytest.mark.parametrize(
    "option, value", [("--min-area", "-1"), ("--level", "1.5"), ("--threshold", "2"), ("--max-pixels", "0")]
)
def test_absurd_options(scan_png, option, value):
    one_line_error(runner.invoke(app, ["measure", str(scan_png), option, value]))


def test_image_too_large(scan_png):
    one_line_error(runner.invoke(app, ["measure", str(scan_png), "--max-pixels", "1000"]), "--max-pixels")


def test_all_background_and_all_foreground(tmp_path):
    blank = tmp_path / "blank.png"
    Image.fromarray(np.full((200, 200), 240, np.uint8)).save(blank, dpi=(300, 300))
    one_line_error(runner.invoke(app, ["measure", str(blank)]), str(blank))
    dark = tmp_path / "dark.png"
    arr = np.full((200, 200), 20, np.uint8)
    arr[90:110, 90:110] = 30
    Image.fromarray(arr).save(dark, dpi=(300, 300))
    one_line_error(runner.invoke(app, ["measure", str(dark)]), str(dark))


def test_unwritable_output_and_no_overwrite_of_input(scan_png, tmp_path):
    one_line_error(
        runner.invoke(app, ["measure", str(scan_png), "--json", str(tmp_path / "missing" / "r.json")]), "missing"
    )
    before = scan_png.read_bytes()
    one_line_error(runner.invoke(app, ["measure", str(scan_png), "--overlay", str(scan_png)]))
    assert scan_png.read_bytes() == before


def test_outputs_are_atomic_no_temp_left(scan_png, tmp_path):
    runner.invoke(app, ["measure", str(scan_png), "--json", str(tmp_path / "r.json")])
    leftovers = [p for p in os.listdir(tmp_path) if p != "r.json"]
    assert leftovers == []


@pytest.mark.slow
def test_demo_runs(tmp_path):
    result = runner.invoke(app, ["demo", "--out", str(tmp_path / "demo")])
    assert result.exit_code == 0, result.output
    written = sorted(p.name for p in (tmp_path / "demo").iterdir())
    assert any(n.endswith(".json") for n in written) and any(n.endswith("-overlay.png") for n in written)
    assert re.search(r"results in .*demo", result.output)
