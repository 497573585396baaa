"""Flatbed scans as they really come: a lid left open on a thick part, thick parts' shadows.

Truth: the exact polygons the scans are rendered from (``scanmass.testing.scans``, exact
pixel coverage): a plate 30 x 20 mm with a hole of 4 mm radius has 600 - 16 pi mm2
(closed forms, statics handbook section table, common practice); areas from shapely.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from cli_helpers import one_line_error
from shapely.geometry import Polygon
from typer.testing import CliRunner

import scanmass
from scanmass.cli.app import app
from scanmass.errors import SegmentationError
from scanmass.segment.lidgap import lid_gap
from scanmass.testing.scans import SynthPart, circle, rectangle, render_scan, save_scan

HEIGHT_MM = 60.0


def _dark_top_band(depth_mm: float, floor: float):
    """Light falling off towards the top edge (a lid held open there): 1 - (1 - floor) exp(-d / depth)."""

    def field(x_mm, y_mm):
        return 1.0 - (1.0 - floor) * np.exp(-(HEIGHT_MM - y_mm) / depth_mm)

    return field


def _scan(parts, illumination, seed=4):
    return render_scan(
        parts, dpi=300, size_mm=(80.0, HEIGHT_MM), blur_px=0.8, noise=0.004, illumination=illumination, seed=seed
    )


def test_lid_gap_with_measurable_parts_is_warned_and_measured():
    plate = SynthPart(rectangle(20.0, 10.0, 30.0, 20.0), [circle(35.0, 20.0, 4.0)])
    m = scanmass.measure(_scan([plate], _dark_top_band(6.0, 0.2)).image, dpi=300)
    assert m.warnings[0].startswith("lid not closed? the background falls to")
    assert "top edge" in m.warnings[0] and "close the lid, or lay a white sheet over the part(s)" in m.warnings[0]
    assert m.settings["lid_gap"]["side"] == "top"
    area = Polygon(plate.outer_mm, plate.holes_mm).area  # shapely; 600 - 16 pi
    assert area == pytest.approx(600 - 16 * math.pi, rel=1e-4)
    assert abs(m.parts[0].area_mm2 - area) <= 3 * m.parts[0].area_u_mm2


def test_lid_gap_hiding_every_part_is_refused_with_the_fix(tmp_path):
    """The only part lies in the dark band: instead of 'touches the image edge', the lid is named."""
    scan = _scan([SynthPart(rectangle(20.0, 38.0, 30.0, 20.0))], _dark_top_band(10.0, 0.1))
    with pytest.raises(SegmentationError, match=r"lid not closed\?.*top edge.*close the lid, or lay a white sheet"):
        scanmass.measure(scan.image, dpi=300)
    path = save_scan(scan, tmp_path / "open-lid.png")
    result = CliRunner().invoke(app, ["measure", str(path)])
    one_line_error(result, "open-lid.png", "lid not closed?", "close the lid")


@pytest.mark.parametrize(
    "illumination",
    [None, (0.3, 0.2)],  # flat light; a gentle linear fall-off of 30 % and 20 % across the scan
)
def test_closed_lid_is_not_flagged(illumination):
    plate = SynthPart(rectangle(20.0, 10.0, 30.0, 20.0))
    scan = _scan([plate, SynthPart(circle(62.0, 45.0, 9.0))], illumination)
    assert lid_gap(scan.image, np.linspace(0, 1, 256) ** 2.2) is None
    m = scanmass.measure(scan.image, dpi=300)
    assert not any("lid" in w for w in m.warnings) and "lid_gap" not in m.settings


def test_light_parts_on_a_dark_background_are_not_a_lid_gap():
    scan = render_scan(
        [SynthPart(rectangle(20.0, 10.0, 30.0, 20.0))],
        dpi=300,
        size_mm=(80.0, HEIGHT_MM),
        background=0.05,
        foreground=0.8,
        blur_px=0.8,
        noise=0.004,
        seed=5,
    )
    m = scanmass.measure(scan.image, dpi=300)
    assert len(m.parts) == 1 and not any("lid" in w for w in m.warnings)
