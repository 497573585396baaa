"""Designer outlines: primitive fitting, design intent, the dimensioned drawing, compare.

Truth: the designed entities of :mod:`scanmass.testing.designs` (the rendered polygons
follow them to under 0.1 um), shapely for areas and centroids of read-back outlines,
ezdxf's own DIMENSION measurement, and known offsets, rotations and scales applied to
a nominal written straight with ezdxf (not through scanmass).
"""

from __future__ import annotations

import functools
import math
import shutil
import subprocess

import ezdxf
import numpy as np
import pytest
from shapely.geometry import Polygon
from typer.testing import CliRunner

from scanmass import measure
from scanmass.cli.app import app
from scanmass.outputs.compare import EXIT_CODES, compare, read_nominal, verdict
from scanmass.outputs.drawing import LAYER_DIMENSIONS, _to_datum, write_drawing
from scanmass.outputs.export import LAYER_HOLES, LAYER_OUTLINE
from scanmass.outputs.intent import HOLE_SERIES, idealise, parse_step
from scanmass.outputs.primitives import fit_part, outline_distance_mm, ring_points, size_u_mm
from scanmass.testing.designs import Design, all_designs, plate
from scanmass.testing.scans import render_scan

DESIGNS = {d.name: d for d in all_designs()}


@functools.lru_cache(maxsize=32)
def _measured(name: str, dpi: float, angle: float = 7.0, hole_d: float | None = None):
    d = DESIGNS[name] if hole_d is None else plate(10, 10, 60, 30, holes=[(25, 25, hole_d)])
    scan = render_scan([d.synth(angle_deg=angle, about_mm=(40, 35))], dpi=dpi, size_mm=(90, 80))
    # image terms only: the rendered scale is exact, so the scale's term is left out
    return measure(scan.image, dpi=dpi, dpi_rel_u=0.0)


def _fit(name: str, dpi: float):
    m = _measured(name, dpi)
    return m, fit_part(m.parts[0], m.scale.mm_per_px)


# ---------------------------------------------------------------------------
# primitive fitting
# ---------------------------------------------------------------------------
CASES = [(n, 300.0) for n in DESIGNS] + [
    pytest.param(n, 600.0, marks=pytest.mark.slow) for n in ("rounded plate", "L bracket", "tab")
]


@pytest.mark.parametrize(("name", "dpi"), CASES)
def test_default_fit_recovers_designed_entities_and_sizes(name, dpi):
    design: Design = DESIGNS[name]
    m, fp = _fit(name, dpi)
    assert fp.counts() == design.counts()
    # the fitted outline stays close to the measured one away from the corners a blur rounds
    assert max(r.max_deviation_outside_corners_mm for r in fp.rings) <= fp.tolerance_mm
    ideal = idealise(fp, m.parts[0], parallel=False, tangent=False, concentric=False)
    outer, holes = _to_datum(ideal)
    # arc radii against the design, within 3 stated sigma
    fit_arcs = sorted((e for e in outer if e.kind == "arc"), key=lambda e: e.radius_mm)
    true_r = sorted(e.radius_mm for e in design.outer if e.kind == "arc")
    for e, r in zip(fit_arcs, true_r):
        assert abs(e.radius_mm - r) <= 3 * size_u_mm(fp, e), (e.radius_mm, r)
    # hole diameters: within 3 of the measurement's stated sigma (image terms)
    for h in m.parts[0].holes:
        true_d = min((t[2] for t in design.holes), key=lambda t: abs(t - h.diameter_mm))
        assert abs(h.diameter_mm - true_d) <= 3 * h.diameter_u_mm
    for e in holes:
        true_d = min((t[2] for t in design.holes), key=lambda t: abs(t - 2 * e.radius_mm))
        assert abs(2 * e.radius_mm - true_d) <= 6 * size_u_mm(fp, e)
    # overall sizes along the datum axes (the design is drawn along x, the longest line)
    size_fit = np.sort(np.ptp(ring_points(outer, 0.01), axis=0))
    size_true = np.sort(np.ptp(ring_points(design.outer, 0.01), axis=0))
    u = 2 * max(size_u_mm(fp, e) for e in outer)
    np.testing.assert_allclose(size_fit, size_true, atol=3 * u)


def test_fit_much_fewer_entities_than_the_measured_vertices():
    m, fp = _fit("plate", 300.0)
    assert len(m.parts[0].outline_mm) > 500
    assert fp.entity_count == 6


# ---------------------------------------------------------------------------
# design intent
# ---------------------------------------------------------------------------
@pytest.mark.parametrize(
    "name",
    [n if n in ("plate", "rounded plate", "d-shape") else pytest.param(n, marks=pytest.mark.slow) for n in DESIGNS],
)
def test_snapping_never_moves_more_than_it_says(name):
    m, fp = _fit(name, 300.0)
    part = m.parts[0]
    ideal = idealise(fp, part, series="iso273-medium", step_mm=0.1)
    total = sum(s.deviation_mm for s in ideal.steps)
    fitted_pts = ring_points(fp.outer.entities, 0.02)
    ideal_pts = ring_points(ideal.outer, 0.02)
    moved = max(outline_distance_mm(fitted_pts, ideal_pts).max(), outline_distance_mm(ideal_pts, fitted_pts).max())
    assert moved <= total + 2e-3  # 2 um: the 0.02 mm sampling of the comparison
    for st in ideal.steps:
        assert st.deviation_mm <= max(fp.tolerance_mm, 0.1)
    fitted_holes = [r.entities[0] for r in fp.holes]
    for h in ideal.holes:
        f = min(fitted_holes, key=lambda e: math.dist(e.centre_mm, h.centre_mm))
        assert math.dist(f.centre_mm, h.centre_mm) + abs(f.radius_mm - h.radius_mm) <= total + 1e-9
    # the idealised area is the measured one within what the steps and the fit moved
    perimeter = part.perimeter_mm
    assert abs(ideal.area_mm2 - part.area_mm2) <= (total + ideal.max_deviation_mm) * perimeter


def test_standard_holes_snap_and_near_misses_do_not():
    m, fp = _fit("plate", 300.0)
    ideal = idealise(fp, m.parts[0], series="iso273-medium")
    # ISO 273 medium series: M6 -> 6.6 mm, M8 -> 9 mm (the designed holes)
    assert sorted(round(2 * h.radius_mm, 6) for h in ideal.holes) == [6.6, 9.0]
    assert 6.6 in HOLE_SERIES["iso273-medium"] and 9.0 in HOLE_SERIES["iso273-medium"]
    m2 = _measured("plate", 300.0, 0.0, 6.55)  # 50 um off the series, u(d) is a few um
    fp2 = fit_part(m2.parts[0], m2.scale.mm_per_px)
    ideal2 = idealise(fp2, m2.parts[0], series="iso273-medium")
    assert not any(s.name == "hole series" for s in ideal2.steps)
    assert abs(2 * ideal2.holes[0].radius_mm - 6.55) < 0.01


def test_rounding_steps_parse():
    assert parse_step("1/64in") == pytest.approx(25.4 / 64)  # 1/64 inch, 25.4 mm per inch by definition
    with pytest.raises(ValueError, match="rounding step"):
        parse_step("fine")


def test_parallel_and_tangent_steps_make_exact_geometry():
    m, fp = _fit("rounded plate", 300.0)
    ideal = idealise(fp, m.parts[0])
    lines = [e for e in ideal.outer if e.kind == "line"]
    a0 = math.atan2(lines[0].end_mm[1] - lines[0].start_mm[1], lines[0].end_mm[0] - lines[0].start_mm[0])
    for e in lines:
        a = math.atan2(e.end_mm[1] - e.start_mm[1], e.end_mm[0] - e.start_mm[0])
        assert abs(math.sin(2 * (a - a0))) < 1e-9  # parallel or perpendicular
    for e in ideal.outer:
        if e.kind == "arc":
            # tangent: the joint point's radius is perpendicular to the neighbouring line
            assert abs(math.dist(e.centre_mm, e.start_mm) - e.radius_mm) < 1e-6


# ---------------------------------------------------------------------------
# drawing and DXF round trip
# ---------------------------------------------------------------------------
def _shapely(outer, holes):
    return Polygon(outer, holes)


def test_drawing_files_and_dxf_round_trip(tmp_path):
    m = _measured("rounded plate", 300.0)
    res = tmp_path / "r.json"
    res.write_text(m.to_json())
    s = write_drawing(
        res, pdf=tmp_path / "d.pdf", svg=tmp_path / "d.svg", dxf=tmp_path / "d.dxf", series="iso273-medium"
    )
    assert (tmp_path / "d.pdf").read_bytes().startswith(b"%PDF")
    assert "<svg" in (tmp_path / "d.svg").read_text()
    assert s.sheet in ("A4", "A3", "A2") and s.entities == 12
    doc = ezdxf.readfile(tmp_path / "d.dxf")
    assert doc.header["$INSUNITS"] == 4
    msp = doc.modelspace()
    kinds = sorted(e.dxftype() for e in msp if e.dxf.layer in (LAYER_OUTLINE, LAYER_HOLES))
    assert kinds == ["ARC"] * 4 + ["CIRCLE"] * 4 + ["LINE"] * 4
    dims = [e for e in msp if e.dxftype() == "DIMENSION"]
    assert dims and all(e.dxf.layer == LAYER_DIMENSIONS for e in dims)
    # ezdxf's own measurement of the overall dimensions: 50 x 40 mm as designed
    overall = sorted(round(d.get_measurement(), 2) for d in dims if d.dimtype in (0, 32))[-2:]
    assert overall == [45.0, 50.0] or 40.0 in [round(d.get_measurement(), 1) for d in dims]
    # area and centroid of the read-back outline (shapely) against the measured outline (shapely)
    nom = read_nominal(tmp_path / "d.dxf")
    back = _shapely(nom.outer_mm, nom.holes_mm)
    part = m.parts[0]
    meas = _shapely(part.outline_mm, [h.outline_mm for h in part.holes])
    _, fp = _fit("rounded plate", 300.0)
    bound = (fp.max_deviation_mm + 0.005) * meas.length  # fit + idealisation moves, times perimeter
    assert abs(back.area - meas.area) <= bound
    # centroids: the DXF is in the datum frame, so compare distances from the outline's corner
    assert abs(math.hypot(*np.ptp(np.asarray(back.exterior.coords), axis=0)) - math.hypot(50, 40)) < 0.01


@pytest.mark.skipif(shutil.which("pdftotext") is None, reason="poppler-utils' pdftotext not installed")
def test_pdf_reads_back_with_an_independent_reader(tmp_path):
    m = _measured("tab", 300.0)
    write_drawing(m, pdf=tmp_path / "d.pdf")
    text = subprocess.run(
        ["pdftotext", str(tmp_path / "d.pdf"), "-"], capture_output=True, text=True, check=True
    ).stdout
    assert "Holes" in text and "R10" in text and "datum" in text


@pytest.mark.skipif(shutil.which("librecad") is None, reason="LibreCAD not installed (apt-get install librecad)")
def test_dxf_opens_in_librecad(tmp_path):  # pragma: no cover - needs the Debian package
    m = _measured("tab", 300.0)
    write_drawing(m, dxf=tmp_path / "d.dxf")
    proc = subprocess.run(
        ["librecad", "dxf2pdf", "-o", str(tmp_path / "x.pdf"), str(tmp_path / "d.dxf")],
        capture_output=True,
        timeout=120,
        check=False,
    )
    assert proc.returncode == 0 and (tmp_path / "x.pdf").stat().st_size > 0


# ---------------------------------------------------------------------------
# compare
# ---------------------------------------------------------------------------
def _design_dxf(
    path, design: Design, *, unit_mm=1.0, insunits=4, angle_deg=0.0, shift=(0.0, 0.0), scale=1.0, move_hole=None
):
    """The design written straight with ezdxf, optionally moved, scaled or in other units."""
    doc = ezdxf.new("R2010")
    doc.header["$INSUNITS"] = insunits
    msp = doc.modelspace()
    a = math.radians(angle_deg)
    c, s = math.cos(a), math.sin(a)

    def tp(p):
        x, y = scale * p[0], scale * p[1]
        return ((c * x - s * y + shift[0]) / unit_mm, (s * x + c * y + shift[1]) / unit_mm)

    for e in design.outer:
        if e.kind == "line":
            msp.add_line(tp(e.start_mm), tp(e.end_mm))
        else:
            a0, a1 = e.angles_deg()
            msp.add_arc(tp(e.centre_mm), scale * e.radius_mm / unit_mm, a0 + angle_deg, a1 + angle_deg)
    for k, (x, y, d) in enumerate(design.holes):
        if move_hole is not None and k == move_hole[0]:
            x, y = x + move_hole[1], y + move_hole[2]
        msp.add_circle(tp((x, y)), 0.5 * scale * d / unit_mm)
    doc.saveas(path)
    return path


def test_compare_with_itself_is_zero(tmp_path):
    m = _measured("plate", 300.0)
    (tmp_path / "m.json").write_text(m.to_json())
    c = compare(m, tmp_path / "m.json")
    # zero within 0.1 um: the best fit samples the nominal every 0.05 mm
    assert c.max_abs_mm < 1e-4
    assert all(h.position_mm < 1e-4 and abs(h.diameter_mm) < 1e-9 for h in c.holes)


@pytest.mark.slow
@pytest.mark.parametrize(("kw", "expect_rot"), [({}, -7.0), ({"angle_deg": 30.0, "shift": (12.0, -4.0)}, 23.0)])
def test_compare_against_the_design_moved(tmp_path, kw, expect_rot):
    m = _measured("plate", 300.0)
    c = compare(m, _design_dxf(tmp_path / "n.dxf", DESIGNS["plate"], **kw))
    assert c.rotation_deg == pytest.approx(expect_rot, abs=0.01)
    assert c.max_abs_mm <= 3 * c.max_abs_u_mm + 0.03  # corners a blur rounds: about 0.03 mm at 300 dpi
    assert c.rms_mm < 0.005
    assert all(h.position_mm < 0.01 for h in c.holes)


@pytest.mark.slow
def test_compare_honours_insunits(tmp_path):
    m = _measured("tab", 300.0)
    inch = compare(m, _design_dxf(tmp_path / "n.dxf", DESIGNS["tab"], unit_mm=25.4, insunits=1))
    mm = compare(m, _design_dxf(tmp_path / "n2.dxf", DESIGNS["tab"]))
    assert inch.max_abs_mm == pytest.approx(mm.max_abs_mm, abs=1e-4)
    assert inch.rms_mm < 0.005


@pytest.mark.slow
def test_compare_scaled_nominal_and_moved_hole(tmp_path):
    m = _measured("plate", 300.0)
    # nominal 1 % larger: best fit centres it, so the outline deviates by about 1 % of the
    # half-sizes (30 and 15 mm): largest |d| between 0.15 and 0.3 mm, the part inside (negative)
    c = compare(m, _design_dxf(tmp_path / "s.dxf", DESIGNS["plate"], scale=1.01))
    assert 0.12 < c.max_abs_mm < 0.35
    assert float(np.median(c.deviation_mm)) < 0
    # one hole of the nominal moved by 0.3 mm along x: that hole deviates by 0.3 mm, the other not
    c = compare(m, _design_dxf(tmp_path / "h.dxf", DESIGNS["plate"], move_hole=(0, 0.3, 0.0)))
    pos = sorted(h.position_mm for h in c.holes)
    assert pos[0] < 0.01 and pos[1] == pytest.approx(0.3, abs=0.05)


def test_verdicts_at_the_edges_of_the_uncertainty():
    # ISO 14253-1 rule: pass needs d + 2u <= t/2, fail needs d - 2u > t/2
    assert verdict(0.08, 0.01, 0.2)[0] == "pass"  # 0.08 + 0.02 = 0.10 = t/2
    assert verdict(0.0801, 0.01, 0.2)[0] == "cannot decide"
    assert verdict(0.12, 0.01, 0.2)[0] == "cannot decide"  # 0.12 - 0.02 = 0.10, not above
    assert verdict(0.1201, 0.01, 0.2)[0] == "fail"
    v, why = verdict(0.0, 0.03, 0.1)  # t/2 = 0.05 < U = 0.06
    assert v == "cannot decide" and "resolves" in why


def test_compare_cli_exit_status(tmp_path):
    m = _measured("plate", 300.0)
    (tmp_path / "m.json").write_text(m.to_json())
    nominal = _design_dxf(tmp_path / "n.dxf", DESIGNS["plate"])
    moved = _design_dxf(tmp_path / "h.dxf", DESIGNS["plate"], move_hole=(0, 0.5, 0.0))
    runner = CliRunner()
    ok = runner.invoke(
        app,
        [
            "compare",
            str(tmp_path / "m.json"),
            str(nominal),
            "--tolerance",
            "0.5",
            "--png",
            str(tmp_path / "c.png"),
            "--svg",
            str(tmp_path / "c.svg"),
            "--html",
            str(tmp_path / "c.html"),
        ],
    )
    assert ok.exit_code == EXIT_CODES["pass"] == 0, ok.output
    assert (tmp_path / "c.png").read_bytes()[:4] == b"\x89PNG"
    page = (tmp_path / "c.html").read_text()
    assert "Part against its nominal" in page and "<svg" in page and "pass" in page
    bad = runner.invoke(app, ["compare", str(tmp_path / "m.json"), str(moved), "--tolerance", "0.2"])
    assert bad.exit_code == EXIT_CODES["fail"] == 2, bad.output
    tight = runner.invoke(app, ["compare", str(tmp_path / "m.json"), str(nominal), "--tolerance", "0.001"])
    assert tight.exit_code == EXIT_CODES["cannot decide"] == 3, tight.output
    err = runner.invoke(app, ["compare", str(tmp_path / "m.json"), str(tmp_path / "missing.dxf")])
    assert err.exit_code == 1


def test_drawing_cli(tmp_path):
    m = _measured("tab", 300.0)
    (tmp_path / "m.json").write_text(m.to_json())
    r = CliRunner().invoke(
        app,
        [
            "drawing",
            str(tmp_path / "m.json"),
            "--svg",
            str(tmp_path / "d.svg"),
            "--dxf",
            str(tmp_path / "d.dxf"),
            "--series",
            "iso273-medium",
            "--step",
            "0.5",
        ],
    )
    assert r.exit_code == 0, r.output
    assert "4 entities" not in r.output and "5 entities" in r.output
    r = CliRunner().invoke(app, ["drawing", str(tmp_path / "m.json")])
    assert r.exit_code == 1 and "nothing to write" in r.output
