"""Tests of scanmass.outputs.export: DXF and SVG outlines, line-and-arc fitting, round trips.

Reference library: shapely (area, centroid, Hausdorff distance) on geometry re-read
with ezdxf (its own bulge and circle expansion, ``ezdxf.path``) and on the SVG path
data parsed here. The measurement's own figures come from scanmass.section on exact
polygons (tests/_exact_results.py).

Round-trip bound (used by ``_bound``). Fitting replaces each run of the measured
polyline by a segment or arc that stays within ``tol`` of it (Hausdorff distance),
so the region between old and new boundary is a strip of width <= tol along the
boundary: the areas differ by at most ``dA = tol * P`` (P: total perimeter, outline
plus holes). Moving the origin to the measured centroid c, the first moment changes
by at most ``dA * rho`` (rho: largest distance from c to the boundary, plus tol), and
the new centroid is that change divided by the new area, so
``|dc| <= tol * P * rho / (A - tol * P)``. ezdxf's flattening of arcs and circles
(chord deviation ``FLAT_MM``) and the SVG's 6-decimal coordinates add to ``tol``.
"""

from __future__ import annotations

import json
import math
import re
import xml.etree.ElementTree as ET

import _exact_results as E
import ezdxf
import numpy as np
import pytest
import shapely
from shapely.geometry import LineString, Polygon

from scanmass.errors import OptionError, OutputError, ResultFormatError
from scanmass.outputs.export import (
    LAYER_HOLES,
    LAYER_OUTLINE,
    LAYER_REFERENCE,
    dxf_document,
    export_dxf,
    export_svg,
    fit_lines_arcs,
    fit_tolerance_default_mm,
    round_tolerance_default_mm,
    svg_text,
)

FLAT_MM = 1e-4  # chord deviation when ezdxf flattens arcs and circles for the checks


# ---------------------------------------------------------------------------
# helpers
# ---------------------------------------------------------------------------
def _bound(part, tol_mm: float) -> tuple[float, float]:
    """(area bound mm2, centroid bound mm) of the module docstring's derivation."""
    outer = np.asarray(part.outline_mm)
    rho = float(np.hypot(*(outer - np.asarray(part.centroid_mm)).T).max()) + tol_mm
    d_area = tol_mm * part.perimeter_mm
    return d_area, d_area * rho / (part.area_mm2 - d_area)


def _flat(entity) -> np.ndarray:
    """Vertices of an LWPOLYLINE (bulges expanded) or CIRCLE, flattened by ezdxf.

    ezdxf does the geometry: ``virtual_entities`` turns each bulge into an exact ARC
    entity (DXF's bulge definition) and ``flattening(sagitta)`` samples ARC and
    CIRCLE within FLAT_MM. (``ezdxf.path`` is not used: it approximates arcs by
    cubic Bezier curves, which sit up to 2.7e-4 R off the circle.)
    """
    if entity.dxftype() == "CIRCLE":
        pts = [(v.x, v.y) for v in entity.flattening(FLAT_MM)]
    else:
        first = entity.get_points("xy")[0]
        pts = []
        for piece in entity.virtual_entities():
            if piece.dxftype() == "LINE":
                seg = [piece.dxf.start, piece.dxf.end]
            else:  # ARC: ezdxf may give it in either direction
                seg = list(piece.flattening(FLAT_MM))
            seg = [(v.x, v.y) for v in seg]
            here = pts[-1] if pts else first
            if math.dist(seg[-1], here) < math.dist(seg[0], here):
                seg.reverse()
            pts.extend(seg[1:] if pts else seg)
    pts = np.array(pts)
    if len(pts) > 1 and np.allclose(pts[0], pts[-1]):
        pts = pts[:-1]
    return pts


def _dxf_polygons(doc) -> list[Polygon]:
    """One shapely polygon per OUTLINE polyline, with the HOLES entities inside it."""
    msp = doc.modelspace()
    outers = [Polygon(_flat(e)) for e in msp.query(f'LWPOLYLINE[layer=="{LAYER_OUTLINE}"]')]
    holes = [Polygon(_flat(e)) for e in msp.query(f'LWPOLYLINE CIRCLE[layer=="{LAYER_HOLES}"]')]
    result = []
    for outer in outers:
        inside = [h for h in holes if outer.contains(h.representative_point())]
        result.append(Polygon(outer.exterior.coords, [h.exterior.coords for h in inside]))
    return result


def _hausdorff(ring_a: np.ndarray, ring_b: np.ndarray, step_mm: float) -> float:
    """Hausdorff distance of two closed rings, both densified to step_mm (shapely).

    Same quantity as ``shapely.hausdorff_distance(a, b, densify=...)``, computed with
    shapely's STRtree nearest-segment query to keep the test fast.
    """

    def directed(src: np.ndarray, dst: np.ndarray) -> float:
        line = shapely.segmentize(LineString(np.vstack([src, src[:1]])), step_mm)
        pts = shapely.points(shapely.get_coordinates(line))
        closed = np.vstack([dst, dst[:1]])
        segs = shapely.linestrings(np.stack([closed[:-1], closed[1:]], axis=1))
        _, dist = shapely.STRtree(segs).query_nearest(pts, return_distance=True, all_matches=False)
        return float(dist.max())

    return max(directed(ring_a, ring_b), directed(ring_b, ring_a))


def _svg_rings(d: str) -> list[np.ndarray]:
    """Rings of an SVG path made of absolute M, L and Z commands (what svg_text writes)."""
    tokens = re.findall(r"[MLZ]|-?\d+(?:\.\d+)?(?:e-?\d+)?", d)
    rings, current, k = [], [], 0
    while k < len(tokens):
        tok = tokens[k]
        if tok in ("M", "L"):
            if tok == "M" and current:
                rings.append(np.array(current))
                current = []
            current.append((float(tokens[k + 1]), float(tokens[k + 2])))
            k += 3
        elif tok == "Z":
            rings.append(np.array(current))
            current = []
            k += 1
        else:
            raise AssertionError(f"unexpected token {tok!r} in path data")
    assert not current, "path not closed with Z"
    return rings


def _evenodd_polygon(rings: list[np.ndarray]) -> Polygon:
    """Even-odd fill of nested, non-overlapping rings: the largest is the shell."""
    polys = sorted((Polygon(r) for r in rings), key=lambda p: p.area, reverse=True)
    return Polygon(polys[0].exterior.coords, [p.exterior.coords for p in polys[1:]])


def _shapely_part(part) -> Polygon:
    return Polygon(part.outline_mm, [h.outline_mm for h in part.holes])


# ---------------------------------------------------------------------------
# fit_lines_arcs
# ---------------------------------------------------------------------------
def test_fit_merges_collinear_vertices_to_corners():
    ring = E.densify(E.rect_ring(10, 20, 80, 50), 0.05)  # 2600 vertices on 4 edges
    out = fit_lines_arcs(ring, 0.001)
    assert out.shape == (4, 3)
    assert np.all(out[:, 2] == 0.0)
    # the corners of the rectangle, in the input's (counter-clockwise) order
    corners = {tuple(v) for v in out[:, :2].round(9)}
    assert corners == {(10, 20), (90, 20), (90, 70), (10, 70)}


@pytest.mark.parametrize("ccw", [True, False])
def test_fit_circle_polygon_gives_two_half_arcs(ccw):
    ring = E.circle_ring(5.0, -3.0, 20.0, 720, ccw=ccw)
    out = fit_lines_arcs(ring, 0.01)
    assert len(out) == 2
    # sweep 180 degrees each: bulge = tan(180 deg / 4) = 1 (DXF group code 42
    # definition), positive counter-clockwise
    np.testing.assert_allclose(out[:, 2], 1.0 if ccw else -1.0, atol=1e-9)
    # the kept vertices are measured vertices, on the circle of radius 20
    np.testing.assert_allclose(np.hypot(out[:, 0] - 5.0, out[:, 1] + 3.0), 20.0, rtol=1e-12)


def _fit_path(out: np.ndarray) -> np.ndarray:
    """Expand a fitted (x, y, bulge) ring with ezdxf (independent of our bulge maths)."""
    doc = ezdxf.new()
    e = doc.modelspace().add_lwpolyline(out.tolist(), format="xyb", close=True)
    return _flat(e)


def test_fit_circle_polygon_area_matches_circle_formula():
    r, n, tol = 20.0, 720, 0.01
    ring = E.circle_ring(0, 0, r, n)
    pts = _fit_path(fit_lines_arcs(ring, tol))
    area = Polygon(pts).area
    # pi r^2 (circle area, handbook formula); the 720-gon's vertices lie on the circle,
    # so fitting arcs through them must give the circle within ezdxf's flattening
    # deviation FLAT_MM along the circumference.
    assert abs(area - math.pi * r * r) <= 2 * math.pi * r * FLAT_MM
    # and the polygon itself (shapely) differs from the circle by its chord segments
    assert abs(Polygon(ring).area - area) <= tol * 2 * math.pi * r


@pytest.mark.slow
def test_fit_stays_within_tolerance_of_noisy_slot():
    rng = np.random.default_rng(6)
    tol = 0.01
    ring = E.stadium_ring(0, 0, 60, 10, 0.04)
    noisy = ring + rng.normal(0.0, 0.002, ring.shape)  # edge noise well below tol
    out = fit_lines_arcs(noisy, tol)
    assert len(out) <= 8, len(out)  # 2 lines + 2 half circles, ideally 4 entities
    assert len(noisy) / len(out) > 300
    fitted = _fit_path(out)
    # Hausdorff distance (shapely, densified to 0.002 mm) between the measured ring and
    # the fitted outline: the fitting promise is <= tol (+ ezdxf's flattening).
    assert _hausdorff(noisy, fitted, 0.002) <= tol + FLAT_MM


@pytest.mark.parametrize("seed", range(5))
def test_fit_random_star_polygons_within_tolerance(seed):
    # Star-shaped rings with smooth and sharp parts; whatever the fit chooses, every
    # point of it stays within tol of the input (Hausdorff, shapely).
    rng = np.random.default_rng(seed)
    t = np.linspace(0, 2 * np.pi, 1500, endpoint=False)
    radius = 30 + 4 * np.sin(3 * t + rng.uniform(0, 6)) + rng.uniform(0, 2) * np.sign(np.sin(5 * t))
    ring = np.column_stack([radius * np.cos(t), radius * np.sin(t)]) + rng.normal(0, 0.001, (len(t), 2))
    tol = float(rng.uniform(0.005, 0.05))
    out = fit_lines_arcs(ring, tol)
    fitted = _fit_path(out)
    assert _hausdorff(ring, fitted, tol / 4) <= tol + FLAT_MM
    assert abs(Polygon(fitted).area - Polygon(ring).area) <= tol * Polygon(ring).length


@pytest.mark.parametrize("bad", [0.0, -1.0, float("nan"), float("inf")])
def test_fit_rejects_bad_tolerance(bad):
    with pytest.raises(OptionError, match="tolerance"):
        fit_lines_arcs(E.rect_ring(0, 0, 1, 1), bad)


def test_fit_rejects_degenerate_ring():
    with pytest.raises(ResultFormatError, match="fewer than 3"):
        fit_lines_arcs([[0, 0], [1, 1], [0, 0]], 0.01)


# ---------------------------------------------------------------------------
# tolerances
# ---------------------------------------------------------------------------
def test_default_fit_tolerance_is_half_the_edge_uncertainty_capped():
    part = E.l_part()
    # fixture: area_u = EDGE_U_MM * perimeter, so area_u / perimeter = 0.01 mm
    assert fit_tolerance_default_mm(part) == pytest.approx(0.5 * E.EDGE_U_MM)
    part.area_u_mm2 = 1.0 * part.perimeter_mm  # edge 1 mm: capped at 0.02 mm
    assert fit_tolerance_default_mm(part) == 0.02
    part.area_u_mm2 = 0.0  # no uncertainty stated: floor 0.001 mm
    assert fit_tolerance_default_mm(part) == 0.001


def test_default_round_tolerance():
    hole = E.plate_part().holes[0]  # d = 12 mm, u(d) = 0.02 mm
    assert round_tolerance_default_mm(hole) == pytest.approx(max(0.02, 0.12, 0.08))


# ---------------------------------------------------------------------------
# DXF document
# ---------------------------------------------------------------------------
@pytest.fixture(scope="module")
def sample():
    return E.sample_measurement()


def test_dxf_header_units_and_layers(sample):
    doc = dxf_document(sample)
    assert doc.header["$INSUNITS"] == 4  # DXF reference: 4 = millimetres
    assert doc.header["$MEASUREMENT"] == 1  # DXF reference: 1 = metric
    for name in (LAYER_OUTLINE, LAYER_HOLES, LAYER_REFERENCE):
        assert doc.layers.has_entry(name)
    assert doc.layers.get(LAYER_REFERENCE).dxf.plot == 0  # not for cutting
    assert doc.layers.get(LAYER_OUTLINE).dxf.plot == 1


def test_dxf_entities_per_layer(sample):
    msp = dxf_document(sample).modelspace()
    outlines = msp.query(f'LWPOLYLINE[layer=="{LAYER_OUTLINE}"]')
    assert len(outlines) == 3 and all(e.closed for e in outlines)
    circles = msp.query(f'CIRCLE[layer=="{LAYER_HOLES}"]')
    # the two round holes of the plate (12 and 8 mm at (30, 45) and (72, 40), the
    # fixture's construction); the 6 mm square hole stays a polyline
    got = sorted((round(c.dxf.radius, 9), round(c.dxf.center.x, 9), round(c.dxf.center.y, 9)) for c in circles)
    assert got == [(4.0, 72.0, 40.0), (6.0, 30.0, 45.0)]
    square = msp.query(f'LWPOLYLINE[layer=="{LAYER_HOLES}"]')
    assert len(square) == 1 and len(square[0]) == 4
    # reference marks only on REFERENCE: per part a point, a cross, two axes, a label
    ref = msp.query(f'*[layer=="{LAYER_REFERENCE}"]')
    assert len(ref.query("POINT")) == 3 and len(ref.query("TEXT")) == 3
    # a cross (2 lines) per part, two axes only where the principal axes are defined (not a near-round part)
    with_axes = sum(p.principal_axes_defined for p in sample.parts)
    assert with_axes < 3 and len(ref.query("LINE")) == 3 * 2 + 2 * with_axes
    assert not msp.query(f'LINE POINT TEXT[layer!="{LAYER_REFERENCE}"]')


def test_dxf_keeps_result_frame_y_up(sample):
    msp = dxf_document(sample).modelspace()
    plate = sample.parts[0]
    e = msp.query(f'LWPOLYLINE[layer=="{LAYER_OUTLINE}"]')[0]
    pts = np.array([(x, y) for x, y, *_ in e.get_points("xy")])
    np.testing.assert_array_equal(pts.min(axis=0), np.min(plate.outline_mm, axis=0))
    np.testing.assert_array_equal(pts.max(axis=0), np.max(plate.outline_mm, axis=0))
    # counter-clockwise outline (positive shoelace area), as written
    assert Polygon(pts).exterior.is_ccw
    # the I2 axis of the L (long along x, tilted) passes through its centroid
    point = msp.query(f'POINT[layer=="{LAYER_REFERENCE}"]')[1]
    assert tuple(point.dxf.location)[:2] == pytest.approx(sample.parts[1].centroid_mm)


def test_dxf_part_selection(sample):
    msp = dxf_document(sample, parts=[2]).modelspace()
    assert len(msp.query(f'LWPOLYLINE[layer=="{LAYER_OUTLINE}"]')) == 1
    with pytest.raises(OptionError, match=r"part 9 is not in the result; choose from \[1, 2, 3\]"):
        dxf_document(sample, parts=[9])


def test_dxf_needs_outlines(sample):
    doc = sample.to_dict(outlines=False)
    m = type(sample).from_dict(doc)
    with pytest.raises(ResultFormatError, match="no outline"):
        dxf_document(m)


@pytest.mark.parametrize("bad", ["fine", -0.1, 0, 11])
def test_dxf_rejects_bad_fit_tolerance(sample, bad):
    with pytest.raises(OptionError, match="fit tolerance"):
        dxf_document(sample, fit_tolerance_mm=bad)


# ---------------------------------------------------------------------------
# DXF round trip
# ---------------------------------------------------------------------------
@pytest.mark.parametrize("fit", [None, 0.01, "auto"])
def test_dxf_round_trip_area_and_centroid(sample, tmp_path, fit):
    out = tmp_path / "parts.dxf"
    summary = export_dxf(sample, out, fit_tolerance_mm=fit)
    assert summary.path == out and summary.parts == 3
    doc = ezdxf.readfile(out)
    assert doc.header["$INSUNITS"] == 4
    polys = _dxf_polygons(doc)
    assert len(polys) == 3
    for part, poly in zip(sample.parts, polys):
        # shapely on the exact fixture polygon agrees with scanmass.section first
        ref = _shapely_part(part)
        assert ref.area == pytest.approx(part.area_mm2, rel=1e-12)
        tol = 0.0 if fit is None else (fit_tolerance_default_mm(part) if fit == "auto" else fit)
        # round holes become circles: a CIRCLE departs from its hole polygon by at
        # most the round tolerance (the default one, see _is_round); charge that to
        # the holes' perimeters, the fit tolerance to the outline's.
        hole_tol = max((round_tolerance_default_mm(h) for h in part.holes), default=0.0)
        outer_len = LineString(np.vstack([part.outline_mm, part.outline_mm[:1]])).length
        d_area = (tol + FLAT_MM) * outer_len + (max(tol, hole_tol) + FLAT_MM) * (part.perimeter_mm - outer_len)
        rho = float(np.hypot(*(np.asarray(part.outline_mm) - part.centroid_mm).T).max()) + tol
        d_centroid = d_area * rho / (part.area_mm2 - d_area)
        assert abs(poly.area - part.area_mm2) <= d_area
        assert math.dist((poly.centroid.x, poly.centroid.y), part.centroid_mm) <= d_centroid


def test_dxf_round_trip_without_circles_is_exact(tmp_path):
    # No holes, no fitting: the DXF holds the measured vertices themselves, so
    # shapely's figures match to rounding (ezdxf writes coordinates in full precision).
    m = E.make_measurement([E.l_part(), E.disc_part()])
    out = tmp_path / "exact.dxf"
    export_dxf(m, out)
    for part, poly in zip(m.parts, _dxf_polygons(ezdxf.readfile(out))):
        assert poly.area == pytest.approx(part.area_mm2, rel=1e-12)
        assert (poly.centroid.x, poly.centroid.y) == pytest.approx(part.centroid_mm, rel=1e-12)


def test_dxf_fit_compresses_and_bound_holds(tmp_path):
    part = E.slot_part(step_mm=0.02)
    m = E.make_measurement([part])
    summary = export_dxf(m, tmp_path / "slot.dxf", fit_tolerance_mm=0.005)
    assert summary.vertices_in > 5000
    assert summary.compression > 500  # 2 lines and 2 arcs (4 or 5 vertices) for the slot
    assert summary.circles == 1 and summary.arcs >= 2
    (poly,) = _dxf_polygons(ezdxf.readfile(tmp_path / "slot.dxf"))
    d_area, d_c = _bound(part, 0.005 + FLAT_MM + round_tolerance_default_mm(part.holes[0]))
    assert abs(poly.area - part.area_mm2) <= d_area
    assert math.dist((poly.centroid.x, poly.centroid.y), part.centroid_mm) <= d_c


# ---------------------------------------------------------------------------
# SVG
# ---------------------------------------------------------------------------
SVG = "{http://www.w3.org/2000/svg}"


def test_svg_true_mm_size_and_viewbox(sample):
    root = ET.fromstring(svg_text(sample, margin_mm=2.0))
    w, h = root.get("width"), root.get("height")
    assert w.endswith("mm") and h.endswith("mm")
    vb = [float(v) for v in root.get("viewBox").split()]
    assert (float(w[:-2]), float(h[:-2])) == pytest.approx((vb[2], vb[3]), abs=1e-6)
    pts = np.vstack([p.outline_mm for p in sample.parts])
    (xmin, ymin), (xmax, ymax) = pts.min(axis=0), pts.max(axis=0)
    # x range as in the frame; y negated by the flip (SVG y points down)
    assert vb == pytest.approx([xmin - 2, -ymax - 2, xmax - xmin + 4, ymax - ymin + 4], abs=1e-6)
    (group,) = root.findall(f"{SVG}g")
    assert group.get("transform") == "matrix(1 0 0 -1 0 0)"


def test_svg_one_evenodd_path_per_part_with_title_and_desc(sample):
    root = ET.fromstring(svg_text(sample))
    paths = root.findall(f".//{SVG}path")
    assert [p.get("id") for p in paths] == ["part-1", "part-2", "part-3"]
    for part, p in zip(sample.parts, paths):
        assert p.get("fill-rule") == "evenodd"
        assert p.find(f"{SVG}title").text == f"part {part.label}"
        assert f"area {part.area_mm2:.3f} mm2" in p.find(f"{SVG}desc").text
        assert len(_svg_rings(p.get("d"))) == 1 + len(part.holes)


def test_svg_round_trip_area_and_centroid(sample, tmp_path):
    out = tmp_path / "parts.svg"
    export_svg(sample, out)
    root = ET.parse(out).getroot()
    for part, p in zip(sample.parts, root.findall(f".//{SVG}path")):
        rings = _svg_rings(p.get("d"))
        # the path data are frame coordinates; the group transform (x, y) -> (x, -y)
        # only places them on the canvas, so undoing it twice is the identity:
        flipped = [r * [1, -1] for r in rings]
        assert all(np.array_equal(f * [1, -1], r) for f, r in zip(flipped, rings))
        poly = _evenodd_polygon(rings)
        # coordinates are written with 6 decimals: each vertex moves <= 5e-7 mm
        d_area, d_c = _bound(part, 5e-7 * math.sqrt(2))
        assert abs(poly.area - part.area_mm2) <= d_area
        assert math.dist((poly.centroid.x, poly.centroid.y), part.centroid_mm) <= d_c


def test_svg_escapes_text(sample):
    m = E.sample_measurement(path="scans/<odd & name>.png")
    root = ET.fromstring(svg_text(m))  # parses: the name is escaped
    assert root.find(f"{SVG}title").text == "scanmass outlines: <odd & name>.png"


def test_svg_part_selection(sample):
    root = ET.fromstring(svg_text(sample, parts=[3]))
    assert [p.get("id") for p in root.findall(f".//{SVG}path")] == ["part-3"]
    vb = [float(v) for v in root.get("viewBox").split()]
    assert vb[2] == pytest.approx(50 + 4)  # the disc's diameter plus margins


# ---------------------------------------------------------------------------
# files and bad input
# ---------------------------------------------------------------------------
def test_export_from_json_path(sample, tmp_path):
    src = tmp_path / "result.json"
    src.write_text(sample.to_json())
    export_svg(src, tmp_path / "o.svg")
    summary = export_dxf(src, tmp_path / "o.dxf", fit_tolerance_mm="auto")
    assert (tmp_path / "o.svg").read_text().startswith("<?xml")
    assert summary.vertices_out < summary.vertices_in


def test_export_refuses_to_overwrite_the_result(sample, tmp_path):
    src = tmp_path / "result.json"
    src.write_text(sample.to_json())
    with pytest.raises(OutputError, match="would overwrite the input"):
        export_dxf(src, src)
    assert json.loads(src.read_text())["schema"] == "scanmass.result/2"


def test_export_missing_folder(sample, tmp_path):
    with pytest.raises(OutputError, match="does not exist"):
        export_svg(sample, tmp_path / "nope" / "o.svg")


def test_export_missing_result_file(tmp_path):
    missing = tmp_path / "missing.json"
    with pytest.raises(ResultFormatError, match="file not found") as info:
        export_dxf(missing, tmp_path / "o.dxf")
    assert str(info.value).startswith(str(missing))
    assert "\n" not in str(info.value)


def test_export_other_schema(tmp_path):
    src = tmp_path / "other.json"
    src.write_text(json.dumps({"schema": "scanmass.assembly/1"}))
    with pytest.raises(ResultFormatError, match="not a scanmass result"):
        export_svg(src, tmp_path / "o.svg")
    src.write_text(json.dumps({"schema": "scanmass.result/99"}))
    with pytest.raises(ResultFormatError, match="not supported"):
        export_svg(src, tmp_path / "o.svg")
    assert not (tmp_path / "o.svg").exists()
