"""The measuring options: one typed object, one validator per value, the same defaults everywhere.

Truth: the scan is rendered by scanmass.testing.scans from an exact polygon; its area comes from
shapely (reference library) via tests/polygon_truth.py. The DPI range (1 to 100000) and the
settings-hash recipe are the ones documented in scanmass/options.py and scanmass/batch/settings.py.
"""

from __future__ import annotations

import hashlib
import json
import subprocess
import sys
from dataclasses import fields
from pathlib import Path

import numpy as np
import pytest
import typer.main
from PIL import Image
from polygon_truth import truth

from scanmass import __version__, measure
from scanmass.batch.runner import run_batch
from scanmass.batch.settings import settings_hash
from scanmass.cli.app import app
from scanmass.errors import OptionError, ScanmassError
from scanmass.load.decode import load_image
from scanmass.measurement import SCHEMA
from scanmass.options import OPTION_NAMES, MeasureOptions, check_dpi, option_field
from scanmass.scale.planemap import PlaneMap
from scanmass.testing.scans import SynthPart, circle, rectangle, render_scan, save_scan

DPI = 200
PARTS = [
    SynthPart(rectangle(6.0, 5.0, 24.0, 15.0, angle_deg=7.0), [circle(18.0, 12.5, 3.0)]),
    SynthPart(circle(42.0, 28.0, 6.0)),
]


@pytest.fixture(scope="module")
def scan_png(tmp_path_factory) -> Path:
    scan = render_scan(PARTS, dpi=DPI, size_mm=(55.0, 40.0), blur_px=0.8, noise=0.004, seed=3)
    return save_scan(scan, tmp_path_factory.mktemp("opt") / "scan.png", dpi="omit")


# ------------------------------------------------------------------------------------
# measure(source, options) == measure(source, **keywords)
# ------------------------------------------------------------------------------------
KEYWORDS = {
    "dpi": DPI,
    "dpi_rel_u": 0.002,
    "level": 0.5,
    "min_area_mm2": 3.0,
    "material": "carbon-steel",
    "thickness_mm": 2.0,
    "thickness_u_mm": 0.05,
}


def test_options_object_and_keywords_give_the_same_result(scan_png):
    by_keywords = measure(scan_png, **KEYWORDS)
    by_object = measure(scan_png, MeasureOptions(**KEYWORDS))
    assert by_object.to_json() == by_keywords.to_json()
    # overrides apply over the object, field by field
    mixed = measure(scan_png, MeasureOptions(**KEYWORDS), dpi_rel_u=0.004)
    assert mixed.to_json() == measure(scan_png, **{**KEYWORDS, "dpi_rel_u": 0.004}).to_json()
    assert mixed.parts[0].area_u_mm2 > by_object.parts[0].area_u_mm2  # the override took effect


def test_options_reach_the_measurement(scan_png):
    # The file stores no DPI: only the options' dpi gives the scale. Area against shapely
    # (reference library) at the rendered 200 dpi; at a stated 100 dpi every length doubles,
    # so the area is four times as large.
    exact = truth(PARTS[1].outer_mm, [])["area"]
    disc = min(measure(scan_png, MeasureOptions(dpi=DPI)).parts, key=lambda p: p.area_mm2)
    assert disc.area_mm2 == pytest.approx(exact, rel=2e-3)
    half = min(measure(scan_png, MeasureOptions(dpi=DPI / 2)).parts, key=lambda p: p.area_mm2)
    assert half.area_mm2 == pytest.approx(4 * exact, rel=2e-3)
    assert disc.mass_g is None
    steel = measure(scan_png, MeasureOptions(dpi=DPI, material="carbon-steel", thickness_mm=2.0))
    # mass = area x thickness x density (common practice); 7850 kg/m3 for carbon steel
    # (handbook value, from memory; the shipped table's entry).
    small = min(steel.parts, key=lambda p: p.area_mm2)
    assert small.mass_g == pytest.approx(small.area_mm2 * 2.0 * 7850e-9 * 1e3, rel=1e-9)


# ------------------------------------------------------------------------------------
# unknown names and bad values
# ------------------------------------------------------------------------------------
def test_unknown_override_names_the_close_match():
    img = np.full((60, 80), 230, np.uint8)
    with pytest.raises(OptionError, match=r"unknown measuring option 'min_area'; did you mean 'min_area_mm2'\?"):
        measure(img, dpi=254, min_area=3)
    with pytest.raises(OptionError, match=r"unknown measuring option 'thickness'; did you mean 'thickness_mm'\?"):
        MeasureOptions().updated(thickness=3)
    with pytest.raises(ValueError, match="unknown measuring option 'frobnicate'; known: dpi, "):
        measure(img, frobnicate=1)  # no close match: the list of known names instead


def test_option_error_is_a_value_error_and_a_scanmass_error():
    assert issubclass(OptionError, ScanmassError) and issubclass(OptionError, ValueError)


def test_options_positional_must_be_an_options_object():
    img = np.full((60, 80), 230, np.uint8)
    with pytest.raises(OptionError, match="options must be a MeasureOptions"):
        measure(img, 254)


@pytest.mark.parametrize(
    "options, message",
    [
        ({"min_area_mm2": -1.0}, "minimum area -1.0 mm2 must be zero or positive"),
        ({"min_hole_area_mm2": float("nan")}, "minimum hole area nan mm2"),
        ({"dpi_rel_u": 0.5}, r"dpi uncertainty 0.5 must be a fraction in \[0, 0.5\)"),
        ({"level": 1.0}, "level 1.0 must lie strictly between 0"),
        ({"threshold": 0.0}, "threshold 0.0 must be a grey fraction"),
        ({"max_pixels": 0}, "max_pixels must be a positive whole number"),
        ({"scale": "ruler"}, "scale 'ruler' must be one of auto, dpi, mat, sheet"),
        ({"scale": "sheet"}, "--scale sheet needs the paper size"),
        ({"material": "carbon-steel"}, "mass needs both a material and a thickness"),
        ({"material": "carbon-steel", "thickness_mm": 0.0}, "thickness_mm must be a positive number of mm"),
        ({"thickness_mm": -1.0}, "thickness_mm must be zero or a positive number of mm"),
        ({"thickness_u_mm": -0.1}, "thickness_u_mm must be zero or a positive number of mm"),
    ],
)
def test_check_refuses_bad_values_naming_the_file(options, message):
    with pytest.raises(OptionError, match=message) as info:
        MeasureOptions(**options).check("scans/plate.png")
    assert str(info.value).startswith("scans/plate.png: ") and "\n" not in str(info.value)


def test_defaults_pass_the_check():
    MeasureOptions().check(None)
    MeasureOptions(dpi=(600, 1200), thickness_mm=0.0).check(None)  # a thickness alone: parallax only


# ------------------------------------------------------------------------------------
# one DPI validator
# ------------------------------------------------------------------------------------
def _message(func, *args, **kw) -> str:
    with pytest.raises(OptionError) as info:
        func(*args, **kw)
    return str(info.value)


def test_one_dpi_validator_everywhere(tmp_path):
    path = tmp_path / "blank.png"
    Image.new("L", (16, 16), 200).save(path)
    expected = "dpi must be a number of dots per inch from 1 to 100000, e.g. --dpi 600 (got 0.5)"
    assert _message(check_dpi, 0.5) == expected
    assert _message(load_image, path, dpi=0.5) == f"{path}: {expected}"  # refused at load
    assert _message(measure, path, dpi=0.5) == f"{path}: {expected}"
    assert _message(PlaneMap.from_dpi, 0.5, height_px=16) == expected
    (tmp_path / "scanmass.toml").write_text("dpi = 0.5\n", encoding="utf-8")
    toml = tmp_path / "scanmass.toml"
    assert _message(run_batch, tmp_path, tmp_path / "out", workers=0) == f"{toml}: {expected}"
    # the bounds themselves are accepted
    assert check_dpi(1) == (1.0, 1.0) and check_dpi(100_000) == (100_000.0, 100_000.0)


def test_stored_dpi_outside_the_range_is_unknown(tmp_path):
    # PNG pHYs (W3C PNG 11.3.5.3) stores whole pixels per metre: 20 px/m is 0.508 dpi,
    # below the same range the option validator applies, so the file's DPI counts as unknown.
    path = tmp_path / "tiny-dpi.png"
    Image.new("L", (16, 16), 200).save(path, dpi=(0.508, 0.508))
    image = load_image(path)
    assert image.dpi is None and "not a plausible resolution" in image.dpi_note


# ------------------------------------------------------------------------------------
# the command line takes its defaults and help texts from MeasureOptions
# ------------------------------------------------------------------------------------
@pytest.mark.parametrize("command", ["measure", "batch"])
def test_cli_defaults_and_help_are_the_options(command):
    click_command = typer.main.get_command(app).commands[command]
    by_flag = {flag: param for param in click_command.params for flag in param.opts}
    for f in fields(MeasureOptions):
        param = by_flag[f.metadata["flag"]]
        assert param.default == f.default, f.name
        assert param.help == f.metadata["help"], f.name
    # the 18 options of measure() before they became one object, + encoding, dpi_override, split_touching
    assert len(OPTION_NAMES) == 21


def test_cli_passes_every_option_through(monkeypatch, tmp_path):
    import scanmass.outputs.writers as writers

    seen = {}

    def fake(source, options=None, **kw):
        seen["options"] = options
        raise OptionError("stop here")

    monkeypatch.setattr(writers, "measure_to_outputs", fake)
    from typer.testing import CliRunner

    flags = ["--dpi", "300", "--min-area", "5", "--keep-clipped", "--thickness", "1.5", "--scale", "dpi"]
    result = CliRunner().invoke(app, ["measure", str(tmp_path / "x.png"), *flags])
    assert result.exit_code == 1 and "stop here" in result.output
    expected = MeasureOptions(dpi=300.0, min_area_mm2=5.0, keep_cut=True, thickness_mm=1.5, scale="dpi")
    assert seen["options"] == expected


def test_option_help_texts_are_one_line():
    for name in OPTION_NAMES:
        f = option_field(name)
        assert f.metadata["help"] and "\n" not in f.metadata["help"]
        assert f.metadata["flag"].startswith("--")


def test_options_module_is_light():
    code = "import sys, scanmass.options; assert 'numpy' not in sys.modules, 'numpy imported'"
    subprocess.run([sys.executable, "-c", code], check=True, cwd=Path(__file__).parents[1])


# ------------------------------------------------------------------------------------
# the batch: settings hash unchanged by the options object (same database)
# ------------------------------------------------------------------------------------
def test_settings_hash_follows_the_documented_recipe():
    # The defaults of the 21 options, written out here: a changed name or default would
    # re-measure every file of every existing batch database (encoding and dpi_override
    # were added with the thin-wall step and the model-error floor, which change results).
    defaults = {
        "dpi": None,
        "dpi_rel_u": 0.001,
        "level": 0.5,
        "threshold": None,
        "min_area_mm2": 2.0,
        "min_hole_area_mm2": None,
        "keep_cut": False,
        "max_pixels": 250_000_000,
        "material": None,
        "thickness_mm": None,
        "thickness_u_mm": 0.0,
        "materials_file": None,
        "scale": "auto",
        "mat": None,
        "sheet": None,
        "printed_x_mm": None,
        "printed_y_mm": None,
        "lens": None,
        "encoding": "auto",
        "split_touching": False,  # added with the touching-part split (issue 11)
        "dpi_override": False,
    }
    doc = {"scanmass": __version__, "schema": SCHEMA, "options": defaults, "files_sha256": {}}
    text = json.dumps(doc, sort_keys=True, separators=(",", ":"), allow_nan=False)
    assert settings_hash({}) == hashlib.sha256(text.encode("utf-8")).hexdigest()
    doc["options"] = {**defaults, "dpi": [600.0, 300.0], "min_area_mm2": 5.0}
    text = json.dumps(doc, sort_keys=True, separators=(",", ":"), allow_nan=False)
    assert settings_hash({"dpi": [600, 300], "min_area_mm2": 5}) == hashlib.sha256(text.encode("utf-8")).hexdigest()


def test_batch_takes_an_options_object(tmp_path, scan_png):
    folder = tmp_path / "scans"
    folder.mkdir()
    (folder / "a.png").write_bytes(scan_png.read_bytes())
    by_object = run_batch(folder, tmp_path / "o1", workers=0, options=MeasureOptions(dpi=DPI, min_area_mm2=3.0))
    by_keywords = run_batch(folder, tmp_path / "o2", workers=0, dpi=DPI, min_area_mm2=3.0)
    assert by_object.measured == by_keywords.measured == 1
    assert (tmp_path / "o1" / "parts.csv").read_text() == (tmp_path / "o2" / "parts.csv").read_text()
    with pytest.raises(OptionError, match="did you mean 'min_area_mm2'"):
        run_batch(folder, tmp_path / "o3", workers=0, options={"min_area": 3})
