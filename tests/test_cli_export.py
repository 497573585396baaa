"""`scanmass export` and `scanmass report` through typer's CliRunner.

End to end on a rendered scan (scanmass.testing.scans): measure, then export and report the
result; the re-read DXF/SVG outlines are compared with the result's own area with
shapely (reference library) within the fit bound of tests/test_export.py
(|dA| <= tol * perimeter). Bad input: one-line error, exit code 1, no traceback.
"""

from __future__ import annotations

import json
import re
import xml.etree.ElementTree as ET
from pathlib import Path

import _exact_results as E
import ezdxf
import numpy as np
import pytest
from cli_helpers import one_line_error
from typer.testing import CliRunner

from scanmass.cli.app import app
from scanmass.measurement import Measurement
from scanmass.outputs.export import fit_tolerance_default_mm
from scanmass.testing.scans import SynthPart, circle, rectangle, render_scan, save_scan

runner = CliRunner()


@pytest.fixture(scope="module")
def measured(tmp_path_factory) -> tuple[Path, Path]:
    """(result JSON, overlay PNG) of a measured synthetic scan: a plate with a hole and a disc."""
    folder = tmp_path_factory.mktemp("measured")
    parts = [SynthPart(rectangle(8.0, 9.0, 30.0, 20.0), [circle(23.0, 19.0, 4.0)]), SynthPart(circle(60.0, 20.0, 9.0))]
    scan = render_scan(parts, dpi=300, size_mm=(80, 40), blur_px=0.9, noise=0.005, seed=21)
    png = save_scan(scan, folder / "plate.png")
    out_json, out_png = folder / "plate.json", folder / "plate-overlay.png"
    result = runner.invoke(app, ["measure", str(png), "--json", str(out_json), "--overlay", str(out_png), "--quiet"])
    assert result.exit_code == 0, result.output
    return out_json, out_png


def test_export_dxf_and_svg(measured, tmp_path):
    src, _ = measured
    m = Measurement.from_json(src.read_text())
    dxf, svg = tmp_path / "p.dxf", tmp_path / "p.svg"
    result = runner.invoke(app, ["export", str(src), "--dxf", str(dxf), "--svg", str(svg)])
    assert result.exit_code == 0, result.output
    assert f"wrote {dxf}" in result.output and f"wrote {svg}" in result.output
    doc = ezdxf.readfile(dxf)
    assert doc.header["$INSUNITS"] == 4
    assert len(doc.modelspace().query('LWPOLYLINE[layer=="SCANMASS_OUTLINE"]')) == len(m.parts)
    root = ET.parse(svg).getroot()
    assert root.get("width").endswith("mm")
    assert len(root.findall(".//{http://www.w3.org/2000/svg}path")) == len(m.parts)


def test_export_fit_tolerance_auto_round_trip(measured, tmp_path):
    from shapely.geometry import Polygon

    src, _ = measured
    m = Measurement.from_json(src.read_text())
    dxf = tmp_path / "fit.dxf"
    result = runner.invoke(app, ["export", str(src), "--dxf", str(dxf), "--fit-tolerance", "auto", "--part", "2"])
    assert result.exit_code == 0, result.output
    n_in, n_out = (int(v) for v in re.search(r"(\d+) -> (\d+) vertices", result.output).groups())
    assert n_out * 10 < n_in
    (e,) = ezdxf.readfile(dxf).modelspace().query('LWPOLYLINE[layer=="SCANMASS_OUTLINE"]')
    pts = []
    for piece in e.virtual_entities():  # ezdxf expands the bulges into exact arcs
        seg = [piece.dxf.start, piece.dxf.end] if piece.dxftype() == "LINE" else list(piece.flattening(1e-4))
        seg = [(v.x, v.y) for v in seg]
        if pts and abs(seg[-1][0] - pts[-1][0]) + abs(seg[-1][1] - pts[-1][1]) < abs(seg[0][0] - pts[-1][0]) + abs(
            seg[0][1] - pts[-1][1]
        ):
            seg.reverse()
        pts.extend(seg)
    part = next(p for p in m.parts if p.label == 2)
    tol = fit_tolerance_default_mm(part)
    assert abs(Polygon(pts).area - part.area_mm2) <= (tol + 1e-4) * part.perimeter_mm


def test_report_with_overlay(measured, tmp_path):
    src, overlay = measured
    out = tmp_path / "report.html"
    result = runner.invoke(app, ["report", str(src), "--html", str(out), "--overlay", str(overlay)])
    assert result.exit_code == 0, result.output
    assert f"wrote {out}" in result.output
    html = out.read_text(encoding="utf-8")
    assert html.count('class="part-row"') == len(Measurement.from_json(src.read_text()).parts)
    assert '<img src="data:image/png;base64,' in html


def test_report_of_several_results(measured, tmp_path):
    src, _ = measured
    other = tmp_path / "other.json"
    other.write_text(E.sample_measurement().to_json())
    out = tmp_path / "two.html"
    result = runner.invoke(app, ["report", str(src), str(other), "--html", str(out), "--title", "Batch 7"])
    assert result.exit_code == 0, result.output
    html = out.read_text(encoding="utf-8")
    assert "<h1>Batch 7</h1>" in html and 'id="image-2"' in html


# -- bad input -------------------------------------------------------------------------
def test_export_result_of_another_schema(tmp_path):
    src = tmp_path / "assembly.json"
    src.write_text(json.dumps({"schema": "scanmass.assembly/1", "members": []}))
    line = one_line_error(
        runner.invoke(app, ["export", str(src), "--svg", str(tmp_path / "o.svg")]), str(src), "not a scanmass result"
    )
    assert not (tmp_path / "o.svg").exists(), line


def test_export_result_of_another_version(tmp_path):
    src = tmp_path / "old.json"
    src.write_text(json.dumps({"schema": "scanmass.result/0"}))
    one_line_error(
        runner.invoke(app, ["export", str(src), "--dxf", str(tmp_path / "o.dxf")]), str(src), "not supported"
    )


def test_export_missing_file(tmp_path):
    missing = tmp_path / "missing.json"
    one_line_error(
        runner.invoke(app, ["export", str(missing), "--dxf", str(tmp_path / "o.dxf")]), str(missing), "file not found"
    )


def test_export_output_folder_missing(measured, tmp_path):
    src, _ = measured
    out = tmp_path / "no-such-folder" / "o.dxf"
    one_line_error(runner.invoke(app, ["export", str(src), "--dxf", str(out)]), "does not exist")


def test_export_needs_an_output(measured):
    src, _ = measured
    one_line_error(runner.invoke(app, ["export", str(src)]), "--dxf", "--svg")


def test_export_bad_fit_tolerance(measured, tmp_path):
    src, _ = measured
    one_line_error(
        runner.invoke(app, ["export", str(src), "--dxf", str(tmp_path / "o.dxf"), "--fit-tolerance", "fine"]),
        "fit tolerance",
    )
    one_line_error(runner.invoke(app, ["export", str(src), "--dxf", str(tmp_path / "o.dxf"), "--part", "7"]), "part 7")


def test_export_never_overwrites_the_result(measured, tmp_path):
    src, _ = measured
    copy = tmp_path / "copy.json"
    copy.write_text(src.read_text())
    one_line_error(runner.invoke(app, ["export", str(copy), "--svg", str(copy)]), "would overwrite")
    assert json.loads(copy.read_text())["schema"] == "scanmass.result/2"


def test_report_bad_input(measured, tmp_path):
    src, _ = measured
    one_line_error(runner.invoke(app, ["report", str(src)]), "--html")
    missing = tmp_path / "gone.json"
    one_line_error(
        runner.invoke(app, ["report", str(missing), "--html", str(tmp_path / "r.html")]), str(missing), "file not found"
    )
    other = tmp_path / "other.json"
    other.write_text(json.dumps({"schema": "something-else/2"}))
    one_line_error(
        runner.invoke(app, ["report", str(other), "--html", str(tmp_path / "r.html")]),
        str(other),
        "not a scanmass result",
    )
    one_line_error(
        runner.invoke(app, ["report", str(src), "--html", str(tmp_path / "none" / "r.html")]), "does not exist"
    )
    not_png = tmp_path / "overlay.png"
    not_png.write_text("not an image")
    one_line_error(
        runner.invoke(app, ["report", str(src), "--html", str(tmp_path / "r.html"), "--overlay", str(not_png)]),
        "not a PNG",
    )
    one_line_error(
        runner.invoke(
            app,
            [
                "report",
                str(src),
                "--html",
                str(tmp_path / "r.html"),
                "--overlay",
                str(not_png),
                "--overlay",
                str(not_png),
            ],
        ),
        "overlays for 1 result",
    )
    assert not (tmp_path / "r.html").exists()


@pytest.mark.parametrize("command", ["export", "report"])
def test_help(command):
    result = runner.invoke(app, [command, "--help"])
    assert result.exit_code == 0
    assert ("--dxf" in result.output) if command == "export" else ("--html" in result.output)


def test_export_dxf_in_inches_is_the_mm_drawing_over_25_4(measured, tmp_path):
    # 1 in = 25.4 mm exactly (international yard and pound agreement, 1959); DXF $INSUNITS 1 =
    # inches, 4 = millimetres (the DXF reference's table of drawing units, common practice)
    src, _ = measured
    mm, inch = tmp_path / "mm.dxf", tmp_path / "in.dxf"
    assert runner.invoke(app, ["export", str(src), "--dxf", str(mm)]).exit_code == 0
    result = runner.invoke(app, ["export", str(src), "--dxf", str(inch), "--units", "in"])
    assert result.exit_code == 0, result.output
    doc_mm, doc_in = ezdxf.readfile(mm), ezdxf.readfile(inch)
    assert doc_mm.header["$INSUNITS"] == 4 and doc_in.header["$INSUNITS"] == 1
    q = 'LWPOLYLINE[layer=="SCANMASS_OUTLINE"]'
    for a, b in zip(doc_mm.modelspace().query(q), doc_in.modelspace().query(q)):
        pa, pb = np.array(a.get_points("xyb")), np.array(b.get_points("xyb"))
        assert np.allclose(pb[:, :2] * 25.4, pa[:, :2], rtol=0, atol=1e-9)
        assert np.array_equal(pb[:, 2], pa[:, 2])  # bulges do not change with the unit
    texts = [t.dxf.text for t in doc_in.modelspace().query('TEXT[layer=="SCANMASS_REFERENCE"]')]
    assert texts and all(t.startswith("part ") for t in texts)
    assert runner.invoke(app, ["export", str(src), "--dxf", str(inch), "--units", "furlong"]).exit_code == 1
