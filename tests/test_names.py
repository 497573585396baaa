"""One vocabulary: every figure has the same name in the JSON, the CSV, the report and the
terminal table (all from scanmass.names.FIGURES); inch outputs against mm outputs.

Conversion factor: 1 in = 25.4 mm exactly (international yard and pound agreement of
1959; common practice), so an area scales by 25.4², a second moment by 25.4⁴.
"""

from __future__ import annotations

import csv
import dataclasses
import io
import json
import math

import pytest
from rich.console import Console

from scanmass.cli.tables import measurement_table
from scanmass.measurement import SCHEMA, Measurement, csv_columns
from scanmass.names import FIGURE, FIGURES, INCH_MM, convert, unit_suffix
from scanmass.outputs.report import render_report
from scanmass.pipeline import measure
from scanmass.testing.scans import SynthPart, circle, rectangle, render_scan


@pytest.fixture(scope="module")
def measured() -> Measurement:
    """A 40 x 20 mm plate with a 6 mm hole and a 20 mm disc, scanned at 300 dpi."""
    scan = render_scan(
        [SynthPart(rectangle(5, 5, 40, 20), [circle(15, 15, 3)]), SynthPart(circle(70, 15, 10))],
        dpi=300,
        size_mm=(90, 35),
        blur_px=0.8,
        noise=0.003,
        seed=11,
    )
    return measure(scan.image, dpi=300, material="steel", thickness_mm=2.0)


def test_inch_is_25_4_mm_exactly():
    assert INCH_MM == 25.4
    assert convert(25.4, "length", "in") == 1.0
    assert convert(25.4**4, "second_moment", "in") == pytest.approx(1.0, rel=1e-15)
    assert convert(90.0, "angle", "in") == 90.0 and convert(3.0, "mass", "in") == 3.0


def test_every_figure_has_one_name_in_json_csv_report_and_table(measured):
    doc = json.loads(measured.to_json())
    assert (
        doc["schema"] == SCHEMA
        and doc["units"]["length"] == "mm"
        and "JSON is always in millimetres" in (doc["units"]["note"])
    )
    part_doc = doc["parts"][0]
    header = next(csv.reader(io.StringIO(measured.to_csv())))
    assert header == csv_columns()
    html = render_report([measured])
    console = Console(width=400, record=True)
    console.print(measurement_table(measured))
    table = console.export_text()
    for fig in FIGURES:
        # JSON: the attribute is the key; a scalar's key is the figure's key, with its _u_ beside it
        if fig.kind != "count":
            assert fig.attr in part_doc, fig
            if fig.index is None:
                assert fig.key() == fig.attr
            if fig.u_attr is not None:
                assert fig.u_attr in part_doc, fig
                if fig.index is None:
                    assert fig.u_key() == fig.u_attr
        else:
            assert isinstance(part_doc[fig.attr], list)  # "holes" is the list; the count is hole_count
        # CSV: the figure's key (and its uncertainty's) are the columns
        assert fig.key() in header and (fig.u_attr is None or fig.u_key() in header), fig
        # report and terminal: the same label
        assert fig.label in html, fig
        if not fig.stem.startswith(("bbox_", "gyration_x", "gyration_y")):
            assert fig.heading() in table, fig
    assert "holes" not in header and "hole_count" in header
    for old in ("Polar moment", "Product of area", "Caliper max", "W top", "Angle / °", "lamina"):
        assert old not in html


def test_csv_in_inches_is_the_mm_csv_over_powers_of_25_4(measured):
    mm_rows = list(csv.DictReader(io.StringIO(measured.to_csv("mm"))))
    in_rows = list(csv.DictReader(io.StringIO(measured.to_csv("in"))))
    power = {"length": 1, "area": 2, "modulus": 3, "second_moment": 4, "angle": 0, "mass": 0, "count": 0}
    checked = 0
    for a, b in zip(mm_rows, in_rows):
        for fig in FIGURES:
            for key_mm, key_in in ((fig.key("mm"), fig.key("in")), (fig.u_key("mm"), fig.u_key("in"))):
                if fig.u_attr is None and key_mm == fig.u_key("mm"):
                    continue
                if a[key_mm] == "":
                    assert b[key_in] == ""
                    continue
                expected = float(a[key_mm]) / 25.4 ** power[fig.kind]
                assert float(b[key_in]) == pytest.approx(expected, rel=1e-12), key_in
                checked += 1
        if int(a["hole_count"]):
            d_mm = [float(v) for v in a[f"hole_diameters_{unit_suffix('length')}"].split()]
            d_in = [float(v) for v in b[f"hole_diameters_{unit_suffix('length', 'in')}"].split()]
            assert d_in == pytest.approx([d / 25.4 for d in d_mm], rel=1e-4)  # 5 significant digits
    assert checked > 50
    assert "area_in2" in in_rows[0] and "ixx_in4" in in_rows[0] and "modulus_top_in3" in in_rows[0]
    assert "area_mm2" not in in_rows[0]


def test_report_and_table_in_inches(measured):
    html = render_report([measured], units="in")
    assert "in²" in html and "in⁴" in html
    plate = measured.parts[0] if measured.parts[0].holes else measured.parts[1]
    # the plate's area, 40 x 20 - pi 3^2 mm2 (closed form), in in2
    area_in2 = (800 - math.pi * 9) / 25.4**2
    assert plate.area_mm2 / 25.4**2 == pytest.approx(area_in2, rel=1e-3)
    console = Console(width=400, record=True)
    console.print(measurement_table(measured, "in"))
    text = console.export_text()
    assert "Area, in²" in text and "Area, mm²" not in text


def test_near_round_part_has_undefined_axes(measured):
    disc = min(measured.parts, key=lambda p: len(p.holes) + abs(p.i1_mm4 - p.i2_mm4) / p.i1_mm4)
    plate = next(p for p in measured.parts if p is not disc)
    assert not disc.principal_axes_defined and plate.principal_axes_defined
    # 40 x 20 rectangle with a central-ish hole: long direction along x, angle 0 or 180 (closed form)
    assert min(plate.principal_angle_deg, 180 - plate.principal_angle_deg) < 1.0
    rows = {int(r["part"]): r for r in csv.DictReader(io.StringIO(measured.to_csv()))}
    assert rows[disc.label]["principal_angle_deg"] == ""
    doc = json.loads(measured.to_json())
    assert {p["label"]: p["principal_axes_defined"] for p in doc["parts"]} == {disc.label: False, plate.label: True}
    console = Console(width=400, record=True)
    console.print(measurement_table(measured))
    assert "undefined (near-round)" in console.export_text()
    # an old (schema 1) document still reads
    old = dict(doc, schema="scanmass.result/1")
    assert Measurement.from_dict(old).parts[0].area_mm2 == doc["parts"][0]["area_mm2"]


_DERIVED = [
    "gyration_x_u_mm",
    "gyration_y_u_mm",
    "gyration_1_u_mm",
    "gyration_2_u_mm",
    "modulus_top_u_mm3",
    "modulus_bottom_u_mm3",
    "modulus_right_u_mm3",
    "modulus_left_u_mm3",
    "caliper_max_u_mm",
    "caliper_min_u_mm",
]


def _only(part, keep: str, rel: float = 0.0):
    """The part with only one uncertainty term left (the others zero) and its derived u's recomputed."""
    terms = {k: dict(v) for k, v in part.uncertainty_terms.items()}
    for name in ("edge", "threshold", "scale"):
        if name != keep:
            terms[name] = {k: 0.0 for k in terms[name]}
    if keep != "edge":
        terms["inputs"]["noise_rel"] = 0.0  # no edge noise at single boundary points either
    if keep == "scale" and rel:
        # a pure scale change s -> s(1 + rel) multiplies a figure of length power p by (1 + rel)^p
        for key, p in (("area_mm2", 2), ("ixx_mm4", 4), ("iyy_mm4", 4), ("i1_mm4", 4), ("i2_mm4", 4)):
            terms["scale"][key] = p * rel * abs(getattr(part, key))
        terms["scale"]["centroid_x_mm"] = rel * abs(part.centroid_mm[0])
        terms["scale"]["centroid_y_mm"] = rel * abs(part.centroid_mm[1])
    return dataclasses.replace(part, uncertainty_terms=terms, **{k: None for k in _DERIVED})


def test_derived_uncertainties_scale_term_is_exact(measured):
    # under a scale factor (1 + r): k ~ s, Z = I / c ~ s^4 / s = s^3, a width ~ s (dimensional analysis)
    r = 0.002
    for part in measured.parts:
        p = _only(part, "scale", r)
        assert p.gyration_x_u_mm == pytest.approx(r * part.gyration_x_mm, rel=1e-9)
        assert p.gyration_2_u_mm == pytest.approx(r * part.gyration_2_mm, rel=1e-9)
        assert p.modulus_top_u_mm3 == pytest.approx(3 * r * part.modulus_top_mm3, rel=1e-9)
        assert p.caliper_max_u_mm == pytest.approx(r * part.caliper_max_mm, rel=1e-9)


def test_derived_uncertainties_threshold_offset_moves_a_width_by_twice_the_offset(measured):
    # a uniform outward offset d changes the area by P d (first order, Steiner's formula for
    # parallel sets) and every caliper width by 2 d
    for part in measured.parts:
        p = _only(part, "threshold")
        d = p.uncertainty_terms["threshold"]["area_mm2"] / part.perimeter_mm
        assert d > 0
        assert p.caliper_min_u_mm == pytest.approx(2 * d, rel=1e-9)
    # every derived figure of a measured part carries an uncertainty, and it is shown
    for part in measured.parts:
        for key in _DERIVED:
            assert getattr(part, key) is not None and getattr(part, key) > 0, key
    html = render_report([measured])
    assert FIGURE["modulus_top"].label in html


def test_bool_flags_show_no_value_in_help():
    from typer.testing import CliRunner

    from scanmass.cli.app import app

    for command in ("measure", "batch", "balance", "export", "report", "demo"):
        out = CliRunner().invoke(app, [command, "--help"], env={"COLUMNS": "200"}).output
        assert "<bool>" not in out, command
