"""Tests of scanmass.outputs.report: the HTML report and the batch summary page (no browser).

The page is parsed with the standard library's html.parser; numbers shown are checked
against handbook values of the fixture shapes (composite-area formulas) and the GUM's
rounding rule; embedded pictures are decoded with pillow.
"""

from __future__ import annotations

import base64
import io
import json
import re
from datetime import UTC, datetime
from html.parser import HTMLParser

import _exact_results as E
import numpy as np
import pytest
from PIL import Image

from scanmass.errors import ImageError, OptionError, OutputError, ResultFormatError
from scanmass.mass.plate import apply_mass
from scanmass.outputs.report import (
    CAUTIONS,
    format_value,
    render_report,
    render_summary,
    write_report,
    write_summary,
)

WHEN = datetime(2024, 5, 6, 7, 8, tzinfo=UTC)


class _Page(HTMLParser):
    """Collects tags with their attributes, and the text of each table row."""

    def __init__(self, html: str) -> None:
        super().__init__(convert_charrefs=True)
        self.tags: list[tuple[str, dict[str, str]]] = []
        self.rows: list[tuple[dict[str, str], list[str]]] = []
        self._row: tuple[dict[str, str], list[str]] | None = None
        self._cell: list[str] | None = None
        self.text: list[str] = []
        self.feed(html)

    def handle_starttag(self, tag, attrs):
        a = {k: (v or "") for k, v in attrs}
        self.tags.append((tag, a))
        if tag == "tr":
            self._row = (a, [])
        elif tag in ("td", "th") and self._row is not None:
            self._cell = []

    def handle_endtag(self, tag):
        if tag in ("td", "th") and self._row is not None and self._cell is not None:
            self._row[1].append("".join(self._cell).strip())
            self._cell = None
        elif tag == "tr" and self._row is not None:
            self.rows.append(self._row)
            self._row = None

    def handle_data(self, data):
        self.text.append(data)
        if self._cell is not None:
            self._cell.append(data)

    def find(self, tag: str, cls: str | None = None) -> list[dict[str, str]]:
        return [a for t, a in self.tags if t == tag and (cls is None or cls in a.get("class", "").split())]

    def row(self, first_cell: str, *, after: int = 0) -> list[str]:
        for _, cells in self.rows[after:]:
            if cells and cells[0] == first_cell:
                return cells
        raise AssertionError(f"no row starting with {first_cell!r}")


def _png_bytes(w=40, h=30) -> bytes:
    buf = io.BytesIO()
    Image.new("RGB", (w, h), (0, 114, 178)).save(buf, format="PNG")
    return buf.getvalue()


@pytest.fixture(scope="module")
def sample():
    return E.sample_measurement(warnings=["threshold uncertain near part 2 <script>alert(1)</script>"])


# ---------------------------------------------------------------------------
# number formatting
# ---------------------------------------------------------------------------
@pytest.mark.parametrize(
    "value, u, expected",
    [
        # GUM (JCGM 100:2008) 7.2.2 example: m = 100.02147 g, u = 0.35 mg
        (100.02147, 0.00035, ("100.02147", "0.00035")),
        # GUM 7.2.6: u to at most two significant digits, value to the same place
        (1234.5678, 0.01234, ("1234.568", "0.012")),
        (833333.3, 1234.0, ("833300", "1200")),
        (0.41, 0.0996, ("0.41", "0.10")),  # 0.0996 rounds up to 0.10: keep 2 decimals
        (-0.00001, 0.003, ("0.0000", "0.0030")),  # no "-0.0000"
        (12.5, None, ("12.5", "")),
        (12.5, 0.0, ("12.5", "")),
        (float("nan"), 1.0, ("–", "")),
        (None, None, ("–", "")),
    ],
)
def test_format_value(value, u, expected):
    assert format_value(value, u) == expected


# ---------------------------------------------------------------------------
# report content
# ---------------------------------------------------------------------------
def test_report_has_a_row_and_a_table_per_part(sample):
    page = _Page(render_report([sample], generated_at=WHEN))
    rows = [a for a in page.find("tr", "part-row")]
    assert [r["data-part"] for r in rows] == ["1", "2", "3"]
    tables = [a for a in page.find("div", "part")]
    assert [t["data-part"] for t in tables] == ["1", "2", "3"]
    assert len(page.find("tr", "hole-row")) == 3  # the plate's three holes


def test_report_values_of_the_l_section(sample):
    page = _Page(render_report([sample], generated_at=WHEN))
    # Part 2 is the L: legs 60 x 10 and 10 x 30 above it, corner at (120, 20).
    # Composite areas (handbook practice): A = 600 + 300 = 900 mm2,
    # xc = (600 * 150 + 300 * 125) / 900 = 141.6667, yc = (600 * 25 + 300 * 45) / 900 = 31.6667.
    # Shown to the decimal place of the stated uncertainty (GUM 7.2.6): u(A) = 2.0,
    # u(xc) = 0.0030, u(yc) = 0.0040 (fixture inputs).
    idx = next(i for i, (a, _) in enumerate(page.rows) if a.get("data-part") == "2")
    summary = page.rows[idx][1]
    assert summary[1:4] == ["900.0", "141.6667", "31.6667"]
    cells = [c for _, c in page.rows]
    area_rows = [c for c in cells if c[:2] == ["Area", "A"]]  # one per part table
    assert area_rows[1][2:6] == ["900.0", "±", "2.0", "mm²"]
    xc_rows = [c for c in cells if c[:2] == ["Centroid x", "xc"]]
    assert xc_rows[1][2:6] == ["141.6667", "±", "0.0030", "mm"]


def test_report_shows_scale_source_warnings_and_cautions(sample):
    html = render_report([sample], generated_at=WHEN)
    page = _Page(html)
    assert page.row("Method")[1] == "scanner resolution, 600 dpi"
    # 25.4 / 600 mm/px = 0.0423333 (definition of the inch), u = 0.1 % of it
    assert page.row("Scale")[1] == "0.042333 ± 0.000042 mm/px"
    # a scan has no fitted map: the row is left out, and no raw matrix is shown
    assert not any(c and c[0] == "Reprojection RMS" for _, c in page.rows) and "Pixel-to-mm map" not in html
    # the warning is shown as text, never as markup
    assert "<script>alert(1)</script>" not in html
    assert "&lt;script&gt;alert(1)&lt;/script&gt;" in html
    assert not page.find("script")
    text = " ".join(page.text)
    for caution in CAUTIONS:
        assert caution in text
    assert "qualified engineer" in text and "local codes" in text
    assert "Generated 2024-05-06 07:08 UTC" in text


def test_report_states_frames_and_conventions(sample):
    text = " ".join(_Page(render_report([sample], generated_at=WHEN)).text)
    for phrase in (
        "x to the right and y up",
        "Ixy = ∫(x − xc)(y − yc) dA",
        "I1 ≥ I2",
        "Ip = Ixx + Iyy (not the torsion constant)",
        "product moment of area",
        "counter-clockwise from +x",
        "u = standard uncertainty (1σ)",
    ):
        assert phrase in text


def test_report_fitted_scale_with_printer_check_and_lens():
    m = E.sample_measurement()
    m.scale.method = "mat"
    m.scale.reprojection_rms_px = 0.123
    m.scale.reprojection_rms_mm = 0.0061
    m.scale.extra = {"printer_check": {"measured_mm": 150.02, "nominal_mm": 150.0}, "lens_profile": "phone-main-26mm"}
    page = _Page(render_report([m], generated_at=WHEN))
    assert page.row("Reprojection RMS")[1] == "0.12 px (0.0061 mm)"
    assert page.row("Check-bar readings")[1] == "measured mm: 150.02; nominal mm: 150"
    assert page.row("Lens profile")[1] == "phone-main-26mm"
    assert page.row("Thickness (parallax)")[1] == "none"


def test_report_mass_rows_when_known(sample):
    # aluminium-6061 from the shipped table; mass = density * area * thickness
    m = apply_mass(sample, "aluminium-6061", 2.0, thickness_u_mm=0.02)
    page = _Page(render_report([m], generated_at=WHEN))
    mass_rows = [c for _, c in page.rows if c[:2] == ["Mass", "m"]]
    assert len(mass_rows) == 3
    for part, cells in zip(m.parts, mass_rows):
        assert cells[2:6] == [
            *format_value(part.mass_g, part.mass_u_g)[:1],
            "±",
            format_value(part.mass_g, part.mass_u_g)[1],
            "g",
        ]
    assert page.row("Sheet thickness")[1] == "2.000 ± 0.020 mm"


def test_report_without_overlay_draws_outlines_inline(sample):
    page = _Page(render_report([sample], generated_at=WHEN))
    svgs = page.find("svg", "outlines")
    assert len(svgs) == 1
    assert not page.find("img")
    # one filled path per part, holes cut out by the even-odd rule
    filled = [a for t, a in page.tags if t == "path" and a.get("fill-rule") == "evenodd"]
    assert len(filled) == 3


def test_report_embeds_overlay_png(sample, tmp_path):
    png = _png_bytes(64, 48)
    f = tmp_path / "ov.png"
    f.write_bytes(png)
    for overlays in ({0: png}, {0: f}, {sample.source.path: png}):
        page = _Page(render_report([sample], overlays=overlays, generated_at=WHEN))
        (img,) = page.find("img")
        src = img["src"]
        assert src.startswith("data:image/png;base64,")
        decoded = base64.b64decode(src.split(",", 1)[1])
        assert decoded == png
        assert Image.open(io.BytesIO(decoded)).size == (64, 48)
        assert (img["width"], img["height"]) == ("64", "48")
        assert not page.find("svg", "outlines")


def test_report_is_self_contained(sample):
    html = render_report([sample, sample], overlays={1: _png_bytes()}, generated_at=WHEN)
    page = _Page(html)
    for tag, attrs in page.tags:
        for key in ("src", "href"):
            value = attrs.get(key, "")
            if value:
                assert value.startswith(("data:", "#")), (tag, key, value)
    assert not re.search(r"url\(\s*['\"]?(?!data:)", html)
    assert "@import" not in html
    assert not page.find("link", None) or all(a.get("href", "").startswith("data:") for a in page.find("link"))
    assert not page.find("script")


def test_report_prints_on_a4(sample):
    html = render_report([sample], generated_at=WHEN)
    assert re.search(r"@page\s*\{\s*size:\s*A4", html)
    assert "@media print" in html


def test_report_from_json_paths_and_index(sample, tmp_path):
    a = tmp_path / "a.json"
    b = tmp_path / "b.json"
    a.write_text(sample.to_json())
    b.write_text(E.make_measurement([E.slot_part()], path="scans/slot.png").to_json())
    page = _Page(render_report([a, b], overlays={str(b): _png_bytes()}, generated_at=WHEN))
    sections = page.find("section", "image")
    assert [s["id"] for s in sections] == ["image-1", "image-2"]
    assert len(page.find("tr", "part-row")) == 4
    assert len(page.find("img")) == 1 and len(page.find("svg", "outlines")) == 1
    hrefs = [a["href"] for a in page.find("a") if a.get("href", "").startswith("#image-")]
    assert "#image-1" in hrefs and "#image-2" in hrefs


def test_write_report(sample, tmp_path):
    src = tmp_path / "r.json"
    src.write_text(sample.to_json())
    out = write_report([src], tmp_path / "report.html", generated_at=WHEN)
    assert out.read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    with pytest.raises(OutputError, match="would overwrite the input"):
        write_report([src], src)
    assert json.loads(src.read_text())["schema"] == "scanmass.result/2"
    with pytest.raises(OutputError, match="does not exist"):
        write_report([src], tmp_path / "missing" / "report.html")


def test_report_bad_inputs(tmp_path):
    with pytest.raises(OptionError, match="no results"):
        render_report([])
    with pytest.raises(ResultFormatError, match="file not found") as info:
        render_report([tmp_path / "nope.json"])
    assert str(info.value).startswith(str(tmp_path / "nope.json"))
    other = tmp_path / "other.json"
    other.write_text(json.dumps({"schema": "scanmass.batch/1", "rows": []}))
    with pytest.raises(ResultFormatError, match="not a scanmass result"):
        render_report([other])
    broken = tmp_path / "broken.json"
    broken.write_text("{")
    with pytest.raises(ResultFormatError, match="not valid JSON"):
        render_report([broken])


def test_report_bad_overlays(sample, tmp_path):
    with pytest.raises(ImageError, match="not found"):
        render_report([sample], overlays={0: tmp_path / "none.png"})
    with pytest.raises(ImageError, match="not a PNG"):
        render_report([sample], overlays={0: b"GIF89a...."})
    with pytest.raises(ImageError, match="damaged PNG"):
        render_report([sample], overlays={0: _png_bytes()[:60]})


# ---------------------------------------------------------------------------
# batch summary
# ---------------------------------------------------------------------------
def _batch_rows():
    rows = E.sample_measurement(path="scans/a.png").csv_rows()
    rows += E.make_measurement([E.slot_part(), E.l_part(5)], path="scans/b.png").csv_rows()
    return rows


def test_summary_counts_failures_and_table():
    rows = _batch_rows()
    failures = [
        {"file": "scans/c.jpg", "reason": "no scale: the file stores no resolution <b>"},
        {"file": "scans/d.png", "error": "no part found"},
    ]
    html = render_summary(rows, failures, generated_at=WHEN)
    page = _Page(html)
    counts = {a["data-count"]: None for a in page.find("td") if "data-count" in a}
    assert set(counts) == {
        "Files",
        "Files measured",
        "Files failed",
        "Duplicate files (skipped)",
        "Files with warnings",
        "Parts",
    }
    assert page.row("Files")[1] == "4"
    assert page.row("Files measured")[1] == "2"
    assert page.row("Files failed")[1] == "2"
    assert page.row("Parts")[1] == "5"
    # paths relative to the folder all files share ("scans"), said once on the page
    assert [c for a, c in page.rows if "failure-row" in a.get("class", "")] == [
        ["c.jpg", "no scale: the file stores no resolution <b>"],
        ["d.png", "no part found"],
    ]
    assert "File paths are relative to <code>scans</code>" in html
    assert "&lt;b&gt;" in html
    part_rows = [c for a, c in page.rows if "part-row" in a.get("class", "")]
    assert len(part_rows) == 5
    headers = page.find("th", "sortable")
    assert [h["data-key"] for h in headers][:3] == ["file", "part", "area_mm2"]
    # numeric cells carry their full value for sorting
    values = [float(a["data-value"]) for a in page.find("td") if "data-value" in a]
    assert rows[0]["area_mm2"] in values
    assert len(page.find("script")) == 1


def test_summary_plots():
    rows = _batch_rows()
    page = _Page(render_summary(rows, [], generated_at=WHEN))
    (hist,) = page.find("svg", "area-histogram")
    bars = page.find("rect", "bar")
    assert 1 <= len(bars) <= 40
    # bar heights are proportional to the counts; the counts add up to the parts
    titles = [t for t in page.text if re.match(r"^-?[\d.e+-]+ to -?[\d.e+-]+ mm²: \d+$", t)]
    assert sum(int(t.rsplit(" ", 1)[1]) for t in titles) == 5
    assert len(page.find("circle", "point")) == 5
    # centroid offset of the disc from its bounding-box centre is 0 (symmetry); of the
    # L (legs 60 x 10, 10 x 30): xc - 150 = -8.3333, yc - 40 = -8.3333 mm (hand values)
    point_titles = [t for t in page.text if " part " in t and "dx" in t]
    assert any(t.endswith("part 3: dx 0 mm, dy 0 mm") for t in point_titles)
    assert any(t.endswith("part 2: dx -8.333 mm, dy -8.333 mm") for t in point_titles)


def test_summary_empty_and_write(tmp_path):
    page = _Page(render_summary([], [{"file": "x.png", "reason": "unreadable"}], generated_at=WHEN))
    assert page.row("Parts")[1] == "0"
    assert not page.find("svg")
    out = write_summary([], [], tmp_path / "s.html")
    assert "No failures." in out.read_text(encoding="utf-8")
    with pytest.raises(OutputError):
        write_summary([], [], tmp_path / "no" / "s.html")


def test_summary_total_mass_when_known():
    m = apply_mass(E.sample_measurement(), "aluminium-6061", 2.0)
    rows = m.csv_rows()
    page = _Page(render_summary(rows, [], generated_at=WHEN))
    total = sum(p.mass_g for p in m.parts)
    assert page.row("Total mass / g")[1] == format_value(total)[0]
    assert np.isclose(float(page.row("Total mass / g")[1]), total, rtol=1e-5)
