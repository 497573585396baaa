"""Perimeter on rendered scans (issue 12): error against shapely and its stated sigma.

Run by hand from the repository root:

    python -m benchmarks.bench_perimeter

Cases (scanmass.testing.scans: exact pixel coverage, Gaussian blur, noise 0 or 0.01):
rectangles (turned 7 and 0 degrees), triangles with apex 40 and 90 degrees, a hexagon,
an octagon, a disc and a plate with a round and a rectangular hole; 300 and 600 dpi; blur
0.5, 1.0 and 1.5 px; measured with ``dpi_rel_u = 0`` (the scale of a render is exact).
Truth: shapely's length of the rendered polygon with holes. Printed per case: the error
and the stated perimeter sigma in px, their ratio, and the perimeter's own terms
(``corners``, ``roughness``) beside the threshold term; then the share within 3 sigma,
the median |error| / sigma and the worst.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
from shapely.geometry import Polygon

import scanmass
from scanmass import measure
from scanmass.testing.scans import SynthPart, circle, rectangle, regular_polygon, render_scan


def _triangle(apex_deg: float, height: float) -> np.ndarray:
    half = height * math.tan(math.radians(apex_deg) / 2)
    return np.array([[25.0 - half, 10.0], [25.0 + half, 10.0], [25.0, 10.0 + height]])


SHAPES = {
    "rect7": lambda: SynthPart(outer_mm=rectangle(10, 10, 30, 20, 7.0)),
    "rect0": lambda: SynthPart(outer_mm=rectangle(10, 10, 30, 20, 0.0)),
    "tri40": lambda: SynthPart(outer_mm=_triangle(40, 25)),
    "tri90": lambda: SynthPart(outer_mm=_triangle(90, 15)),
    "hexagon": lambda: SynthPart(outer_mm=regular_polygon(25, 25, 12, 6, 3)),
    "octagon": lambda: SynthPart(outer_mm=regular_polygon(25, 25, 12, 8, 3)),
    "disc": lambda: SynthPart(outer_mm=circle(25, 25, 12)),
    "plate+holes": lambda: SynthPart(
        outer_mm=rectangle(8, 8, 34, 30, 3), holes_mm=[circle(18, 20, 4)[::-1], rectangle(28, 15, 8, 10, 3)[::-1]]
    ),
}


def main() -> None:
    print(f"scanmass {scanmass.__version__} from {scanmass.__file__}")
    print(
        f"{'shape':12s} {'dpi':>4s} {'blur':>4s} {'noise':>5s} {'error px':>9s} {'sigma px':>9s} {'e/sigma':>7s}  terms px"
    )
    z = []
    for name, make in SHAPES.items():
        for dpi in (300, 600):
            for blur in (0.5, 1.0, 1.5):
                for noise in (0.0, 0.01):
                    part = make()
                    truth = Polygon(part.outer_mm, list(part.holes_mm)).length  # shapely
                    scan = render_scan([part], dpi=dpi, size_mm=(50, 50), blur_px=blur, noise=noise, seed=1)
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        p = measure(scan.image, dpi=dpi, dpi_rel_u=0).parts[0]
                    px = 25.4 / dpi
                    err, u = p.perimeter_mm - truth, p.perimeter_u_mm
                    z.append(abs(err) / u if u > 0 else math.inf)
                    terms = p.uncertainty_terms
                    shown = ", ".join(
                        f"{k} {terms[k]['perimeter_mm'] / px:.3f}"
                        for k in ("threshold", "corners", "roughness")
                        if k in terms
                    )
                    print(
                        f"{name:12s} {dpi:4d} {blur:4.1f} {noise:5.2f} {err / px:+9.3f} {u / px:9.3f} "
                        f"{err / u if u > 0 else math.inf:+7.2f}  {shown}"
                    )
    za = np.array(z)
    print(
        f"\n{len(za)} cases: within 3 sigma {100 * np.mean(za <= 3):.1f} %, "
        f"median |error|/sigma {np.median(za):.2f}, worst {za.max():.2f}"
    )


if __name__ == "__main__":
    main()
