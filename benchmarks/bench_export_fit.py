"""How much line-and-arc fitting shrinks DXF outlines, and what it costs in accuracy.

Run by hand from the repository root:

    python -m benchmarks.bench_export_fit [--dpi 600]

Renders a synthetic scan (scanmass.testing.scans) of a slotted plate with round holes and an
L bracket, measures it with scanmass.measure, and writes DXF files with no fitting, with
the automatic tolerance and with a few fixed tolerances. For each it prints the vertex
count before and after (compression), the arcs and circles written, the time taken, and
the area and centroid of the outlines re-read with ezdxf (bulges expanded to exact arcs)
and computed with shapely, against the measurement's own figures. The round-trip
difference should stay below tolerance x perimeter (see tests/test_export.py).
"""

from __future__ import annotations

import argparse
import math
import tempfile
import time
from pathlib import Path

import ezdxf
import numpy as np
from shapely.geometry import Polygon

import scanmass
from scanmass import export_dxf, measure
from scanmass.outputs.export import fit_tolerance_default_mm
from scanmass.testing.scans import SynthPart, circle, l_section, rectangle, render_scan, save_scan


def _slot(cx: float, cy: float, length: float, r: float) -> np.ndarray:
    a = np.linspace(-0.5 * math.pi, 0.5 * math.pi, 400)
    right = np.column_stack([cx + 0.5 * length + r * np.cos(a), cy + r * np.sin(a)])
    left = np.column_stack([cx - 0.5 * length - r * np.cos(a), cy - r * np.sin(a)])
    return np.vstack([right, left])


def _ring(entity) -> np.ndarray:
    if entity.dxftype() == "CIRCLE":
        return np.array([(v.x, v.y) for v in entity.flattening(1e-4)])
    pts: list[tuple[float, float]] = []
    first = entity.get_points("xy")[0]
    for piece in entity.virtual_entities():
        seg = [piece.dxf.start, piece.dxf.end] if piece.dxftype() == "LINE" else list(piece.flattening(1e-4))
        seg = [(v.x, v.y) for v in seg]
        here = pts[-1] if pts else first
        if math.dist(seg[-1], here) < math.dist(seg[0], here):
            seg.reverse()
        pts.extend(seg)
    return np.array(pts)


def _polygons(path: Path) -> list[Polygon]:
    msp = ezdxf.readfile(path).modelspace()
    outers = [Polygon(_ring(e)) for e in msp.query('LWPOLYLINE[layer=="SCANMASS_OUTLINE"]')]
    holes = [Polygon(_ring(e)) for e in msp.query('LWPOLYLINE CIRCLE[layer=="SCANMASS_HOLES"]')]
    return [
        Polygon(o.exterior.coords, [h.exterior.coords for h in holes if o.contains(h.representative_point())])
        for o in outers
    ]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--dpi", type=float, default=600.0)
    args = parser.parse_args()
    print(f"scanmass {scanmass.__version__} from {scanmass.__file__}")

    plate = SynthPart(rectangle(10, 10, 120, 70), [circle(30, 45, 6.0), circle(110, 60, 4.0), _slot(75, 30, 40, 5)])
    bracket = SynthPart(l_section(150, 10, 60, 50, 8))
    scan = render_scan([plate, bracket], dpi=args.dpi, size_mm=(230, 90), blur_px=1.0, noise=0.004, seed=3)
    with tempfile.TemporaryDirectory() as tmp:
        png = save_scan(scan, Path(tmp) / "plate.png")
        t0 = time.perf_counter()
        m = measure(png)
        print(f"measured {len(m.parts)} parts at {args.dpi:g} dpi in {time.perf_counter() - t0:.2f} s")
        for p in m.parts:
            print(
                f"  part {p.label}: area {p.area_mm2:.3f} mm2, u {p.area_u_mm2:.3f}; perimeter {p.perimeter_mm:.1f} mm; "
                f"auto fit tolerance {fit_tolerance_default_mm(p) * 1000:.1f} um"
            )
        header = f"{'tolerance':>10} {'vert in':>8} {'vert out':>8} {'ratio':>7} {'arcs':>5} {'circ':>5} {'time s':>7} {'max |dA| mm2':>13} {'bound':>9} {'max |dc| um':>11}"
        print(header)
        for tol in (None, "auto", 0.005, 0.01, 0.02, 0.05):
            out = Path(tmp) / "o.dxf"
            t0 = time.perf_counter()
            s = export_dxf(m, out, fit_tolerance_mm=tol)
            dt = time.perf_counter() - t0
            d_area, d_c, bound = 0.0, 0.0, 0.0
            for part, poly in zip(m.parts, _polygons(out)):
                d_area = max(d_area, abs(poly.area - part.area_mm2))
                d_c = max(d_c, math.dist((poly.centroid.x, poly.centroid.y), part.centroid_mm))
                t = 0.0 if tol is None else (fit_tolerance_default_mm(part) if tol == "auto" else tol)
                bound = max(bound, t * part.perimeter_mm)
            print(
                f"{str(tol):>10} {s.vertices_in:8d} {s.vertices_out:8d} {s.compression:7.1f} {s.arcs:5d} {s.circles:5d} "
                f"{dt:7.3f} {d_area:13.5f} {bound:9.4f} {d_c * 1000:11.3f}"
            )
        print("(|dA| with tolerance None comes from round holes written as circles)")


if __name__ == "__main__":
    main()
