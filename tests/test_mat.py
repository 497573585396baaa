"""Marker mats: layouts, the PNG against its layout JSON, the PDF's physical size, the CLI.

Check values: paper sizes from ISO 216:2007 table 1 (A4 210 x 297 mm, A3 297 x 420 mm)
and ANSI/ASME Y14.1-2020 table 1 (size A, US Letter, 8.5 x 11 in = 215.9 x 279.4 mm);
1 in = 25.4 mm and 1 pt = 1/72 in (ISO 32000-1 section 8.3.2.3, default user space);
marker corners detected by OpenCV's ArUco module (reference library) in the rendered PNG.
"""

from __future__ import annotations

import json
import re
import zlib
from pathlib import Path

import numpy as np
import pytest
import shapely
from typer.testing import CliRunner

from scanmass.cli.app import app
from scanmass.errors import OptionError, ScaleError
from scanmass.load.decode import load_image
from scanmass.outputs.scale_files import write_mat
from scanmass.scale.markers import detect_markers
from scanmass.scale.mat import (
    IDS_PER_LAYOUT,
    LAYOUT_NAMES,
    MatLayout,
    layout_for_ids,
    load_layout,
    make_mat,
    mat_dark_rectangles,
    mat_pdf_bytes,
    render_mat_png,
)

# ISO 216:2007 table 1 and ANSI/ASME Y14.1-2020 table 1 (portrait width, height, mm)
PAPER_MM = {"a4": (210.0, 297.0), "a3": (297.0, 420.0), "letter": (215.9, 279.4)}


@pytest.mark.parametrize("name", LAYOUT_NAMES)
def test_layout_geometry(name):
    mat = make_mat(name)
    paper, orient = name.split("-")
    w, h = PAPER_MM[paper]
    assert mat.page_mm == pytest.approx((w, h) if orient == "portrait" else (h, w), abs=1e-9)
    page = shapely.box(0, 0, *mat.page_mm)
    clear = shapely.box(*mat.clear_area_mm)
    # ids: the layout's own block, unique, in order
    block = LAYOUT_NAMES.index(name)
    assert list(mat.ids) == list(range(block * IDS_PER_LAYOUT, block * IDS_PER_LAYOUT + len(mat.markers)))
    squares = [shapely.Polygon(m.corners_mm) for m in mat.markers]
    for sq in squares:
        assert sq.area == pytest.approx((7 * mat.cell_mm) ** 2)
        # 5 mm from the page edge at least: inside the printable area of office printers (common practice)
        assert page.buffer(-5.0).contains(sq)
        # a quiet zone of at least one cell around every marker
        assert min(sq.distance(o) for o in squares if o is not sq) >= mat.cell_mm
    # nothing printed inside the clear area (shapely intersection), and it is large
    dark = shapely.union_all([shapely.Polygon(r) for r in mat_dark_rectangles(mat)])
    assert dark.intersection(clear).area == 0.0
    assert clear.area > 0.45 * page.area
    # the markers surround the clear area
    assert shapely.MultiPolygon(squares).convex_hull.contains(clear)
    # check bars: 100 mm end to end, along x and along y
    bx, by = mat.bar("x").rectangle_mm(), mat.bar("y").rectangle_mm()
    assert bx[2] - bx[0] == pytest.approx(100.0) and by[3] - by[1] == pytest.approx(100.0)


def test_layout_ids_identify_the_mat():
    for name in LAYOUT_NAMES:
        mat = make_mat(name)
        assert layout_for_ids(mat.ids[3:9]).name == name
    with pytest.raises(ScaleError, match="belong to no scanmass mat"):
        layout_for_ids([247, 248, 249])
    with pytest.raises(ScaleError, match="several mats"):
        layout_for_ids([0, 1, 2, 40, 41, 42])
    with pytest.raises(OptionError, match="unknown mat layout 'a5'"):
        make_mat("a5")


def test_layout_json_round_trip(tmp_path):
    mat = make_mat("letter-landscape")
    data = json.loads(mat.to_json())
    assert data["clear_area_mm"] == list(mat.clear_area_mm)
    assert data["corner_order"] == ["top-left", "top-right", "bottom-right", "bottom-left"]
    back = MatLayout.from_dict(data)
    assert np.allclose(back.corners_mm, mat.corners_mm, atol=1e-6) and back.clear_area_mm == mat.clear_area_mm
    path = tmp_path / "mat.json"
    path.write_text(mat.to_json())
    assert load_layout(path).name == "letter-landscape"
    path.write_text('{"schema": "other"}')
    with pytest.raises(ScaleError, match="not a scanmass mat layout"):
        load_layout(path)


@pytest.mark.parametrize("dpi", [150.0, 203.0])
def test_png_markers_land_on_layout_corners(dpi):
    """Markers found in the mat's own PNG sit at the layout's corners, by DESIGN.md's pixel formula."""
    mat = make_mat("a4-portrait")
    img = render_mat_png(mat, dpi)
    s = 25.4 / dpi
    assert img.shape == (round(297.0 / s), round(210.0 / s))
    det = detect_markers(load_image(img))
    assert sorted(det.ids) == sorted(mat.ids)
    corners_mm = mat.marker_corners(det.ids).reshape(-1, 2)
    # x_mm = (x_px + 0.5) s, y_mm = (H - y_px - 0.5) s with OpenCV's pixel centres at integers
    expected_px = np.column_stack([corners_mm[:, 0] / s - 0.5, img.shape[0] - corners_mm[:, 1] / s - 0.5])
    err = det.corners_px.reshape(-1, 2) - expected_px
    assert np.abs(err).max() < 0.02  # "<< 0.1 px"
    assert abs(err.mean()) < 0.002


def test_pdf_physical_size_and_structure():
    mat = make_mat("a4-portrait")
    data = mat_pdf_bytes(mat)
    assert data.startswith(b"%PDF-1.6") and data.rstrip().endswith(b"%%EOF")
    box = re.search(rb"/MediaBox \[0 0 ([\d.]+) ([\d.]+)\]", data)
    # A4 in points: 210 / 25.4 * 72 = 595.2756, 297 / 25.4 * 72 = 841.8898
    assert float(box.group(1)) == pytest.approx(595.2756, abs=1e-3)
    assert float(box.group(2)) == pytest.approx(841.8898, abs=1e-3)
    # the cross-reference table points at every object
    xref = int(re.search(rb"startxref\n(\d+)", data).group(1))
    entries = re.findall(rb"(\d{10}) 00000 n", data[xref:])
    for k, off in enumerate(entries, start=1):
        assert data[int(off) :].startswith(f"{k} 0 obj".encode())
    # the content stream draws one filled rectangle per dark area, in mm
    stream = re.search(rb"stream\n(.*)\nendstream", data, re.S).group(1)
    ops = zlib.decompress(stream).decode("latin-1")
    assert ops.count(" re f") == len(mat_dark_rectangles(mat))
    assert ops.startswith("2.834645669 0 0 2.834645669 0 0 cm")  # 72 / 25.4 pt per mm
    assert "/PrintScaling /None" in data.decode("latin-1")


def test_cli_mat_writes_files_and_refuses_bad_layout(tmp_path):
    runner = CliRunner()
    res = runner.invoke(
        app,
        [
            "mat",
            "--layout",
            "a3-landscape",
            "--pdf",
            str(tmp_path / "m.pdf"),
            "--png",
            str(tmp_path / "m.png"),
            "--dpi",
            "60",
        ],
    )
    assert res.exit_code == 0, res.output
    assert {p.name for p in tmp_path.iterdir()} == {"m.pdf", "m.png", "m.json"}
    assert json.loads((tmp_path / "m.json").read_text())["name"] == "a3-landscape"
    res = runner.invoke(app, ["mat", "--layout", "a5", "--pdf", str(tmp_path / "x.pdf")])
    assert res.exit_code == 1 and "unknown mat layout 'a5'" in res.output and len(res.output.strip().splitlines()) == 1
    assert not (tmp_path / "x.pdf").exists()
    with pytest.raises(OptionError, match="give an output"):
        write_mat("a4-portrait")


def test_shipped_mats_match_the_layouts():
    folder = Path(__file__).resolve().parent.parent / "calibration"  # the repository's, also when testing a wheel
    for name in LAYOUT_NAMES:
        assert json.loads((folder / f"mat-{name}.json").read_text()) == json.loads(make_mat(name).to_json())
        assert (folder / f"mat-{name}.pdf").read_bytes() == mat_pdf_bytes(make_mat(name))
