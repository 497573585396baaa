"""The batch summary page: a batch's database rendered by `scanmass report DIR --html`.

Expected areas: the rendered discs' closed form pi r^2 (statics handbook table, common practice).
"""

from __future__ import annotations

import math

import pytest
from typer.testing import CliRunner

from scanmass.batch.export import summary_rows
from scanmass.batch.runner import run_batch
from scanmass.cli.app import app
from scanmass.testing.scans import SynthPart, circle, render_scan, save_scan

runner = CliRunner()


@pytest.fixture(scope="module")
def batch_dir(tmp_path_factory):
    scans = tmp_path_factory.mktemp("scans")
    for k, r in enumerate((6.0, 9.0)):
        scan = render_scan(
            [SynthPart(circle(20.0, 20.0, r))], dpi=200, size_mm=(40, 40), blur_px=0.8, noise=0.004, seed=k
        )
        save_scan(scan, scans / f"disc{k}.png")
    (scans / "zcopy").mkdir()  # found after disc0.png, so recorded as its duplicate
    (scans / "zcopy" / "disc0-again.png").write_bytes((scans / "disc0.png").read_bytes())
    (scans / "broken.png").write_text("not an image")
    out = tmp_path_factory.mktemp("out")
    run_batch(scans, out, workers=0)
    return out


def test_summary_rows_from_the_database(batch_dir):
    rows, failures = summary_rows(batch_dir)
    areas = sorted(float(r["area_mm2"]) for r in rows)
    assert areas == pytest.approx([math.pi * 36, math.pi * 81], rel=2e-3)  # pi r^2
    assert len(failures) == 1 and failures[0]["file"].endswith("broken.png") and failures[0]["reason"]


def test_report_of_a_batch_folder(batch_dir, tmp_path):
    out = tmp_path / "summary.html"
    result = runner.invoke(app, ["report", str(batch_dir), "--html", str(out)])
    assert result.exit_code == 0, result.output
    html = out.read_text(encoding="utf-8")
    assert "broken.png" in html and "disc0.png" in html and "disc1.png" in html
    assert "<svg" in html  # inline plots
    # paths relative to the scans folder, duplicates counted, a warnings section
    assert 'data-count="Duplicate files (skipped)">1<' in html
    assert "<h2>Warnings</h2>" in html and "File paths are relative to" in html
    assert "<td><code>broken.png</code></td>" in html  # the file column, relative to the scans folder


def test_report_of_a_folder_without_database(tmp_path):
    result = runner.invoke(app, ["report", str(tmp_path), "--html", str(tmp_path / "x.html")])
    assert result.exit_code == 1
    assert "scanmass batch" in result.output
