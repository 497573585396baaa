"""Sharpening and tone curves (issue 11, phone pictures): errors, flags and coverage.

Run by hand from the repository root:

    python -m benchmarks.bench_tone [--seed 1]

Rendered scans (scanmass.testing.scans: exact pixel coverage, Gaussian blur in linear
light, sRGB, 8 bit) of a plate with a hole and a ring, at 300 dpi, blur 0.6, 0.8 and
1.5 px, noise 0 and 0.01, then processed as scanner or camera software does:

- *usm a/r*: an unsharp mask ``s = f + a (f - G_r * f)`` on the stored values;
- *gamma 2.2*: a pure power curve instead of sRGB's;
- *s-curve*: a tanh contrast curve on top of sRGB (a stand-in for a phone's rendering);
- *local contrast*: an unsharp mask of radius 40 px, amount 0.8.

All measured with ``dpi_rel_u = 0`` (image terms only). Printed per case: the edge move
(area error over the perimeter, px), the error in stated sigma, whether a sharpening halo
was flagged (the term ``tone``) -- and, as photos, where the tone term always applies,
the same error against the sigma with the term.
"""

from __future__ import annotations

import argparse
import math
import statistics

import cv2
import numpy as np
from shapely.geometry import Polygon

from scanmass import measure
from scanmass.load.decode import load_image
from scanmass.options import MeasureOptions
from scanmass.pipeline import measure_image
from scanmass.testing.scans import SynthPart, circle, rectangle, render_scan, srgb_encode

DPI = 300.0
PARTS = [
    SynthPart(rectangle(10.0, 10.0, 40.0, 25.0, angle_deg=7.0), [circle(22.0, 22.0, 4.0)]),
    SynthPart(circle(75.0, 25.0, 12.0), [circle(75.0, 25.0, 5.0)]),
]


def _u8(values: np.ndarray) -> np.ndarray:
    return np.clip(np.round(values), 0, 255).astype(np.uint8)


def variants(linear: np.ndarray, image: np.ndarray) -> dict[str, np.ndarray]:
    f = image.astype(np.float64)
    out = {"plain": image}
    for amount, radius in ((0.3, 1.0), (0.6, 1.0), (1.5, 1.5), (1.0, 3.0)):
        out[f"usm {amount}/{radius}"] = _u8(f + amount * (f - cv2.GaussianBlur(f, (0, 0), radius)))
    lin = np.clip(linear, 0.0, 1.0)
    out["gamma 2.2"] = _u8(255.0 * lin ** (1 / 2.2))
    e = srgb_encode(lin)
    out["s-curve"] = _u8(255.0 * (0.5 + 0.5 * np.tanh(3.0 * (e - 0.5)) / math.tanh(1.5)))
    out["local contrast"] = _u8(f + 0.8 * (f - cv2.GaussianBlur(f, (0, 0), 40.0)))
    return out


def main(argv: list[str] | None = None) -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--seed", type=int, default=1)
    args = ap.parse_args(argv)
    truths = [Polygon(p.outer_mm, p.holes_mm) for p in sorted(PARTS, key=lambda p: p.outer_mm[0, 0])]
    px = 25.4 / DPI
    rows = []
    print(f"{'blur':>4} {'noise':>5} {'case':<15} {'edge px':>8} {'z':>7} {'flag':>5} {'z photo':>8}")
    for blur in (0.6, 0.8, 1.5):
        for noise in (0.0, 0.01):
            synth = render_scan(PARTS, dpi=DPI, size_mm=(100.0, 50.0), blur_px=blur, noise=noise, seed=args.seed)
            for name, image in variants(synth.linear, synth.image).items():
                scan = measure(image, dpi=DPI, dpi_rel_u=0)
                # the photo rule: the tone term always (measure_image with tone_known=False)
                loaded = load_image(image, dpi=DPI)
                photo = measure_image(loaded, MeasureOptions(dpi=DPI, dpi_rel_u=0), tone_known=False)
                for got, doubted, poly in zip(
                    sorted(scan.parts, key=lambda q: q.centroid_mm[0]),
                    sorted(photo.parts, key=lambda q: q.centroid_mm[0]),
                    truths,
                ):
                    err = got.area_mm2 - poly.area
                    edge = err / poly.length / px
                    z = err / got.area_u_mm2
                    zp = err / doubted.area_u_mm2
                    flag = "tone" in got.uncertainty_terms
                    rows.append((name, noise, edge, z, flag, zp))
                    print(f"{blur:4.1f} {noise:5.2f} {name:<15} {edge:+8.3f} {z:+7.1f} {flag!s:>5} {zp:+8.2f}")
    print()
    for name in dict.fromkeys(r[0] for r in rows):
        sel = [r for r in rows if r[0] == name]
        within = sum(abs(r[3]) <= 3 for r in sel)
        flagged = sum(r[4] for r in sel)
        print(
            f"{name:<15} |edge| median {statistics.median(abs(r[2]) for r in sel):.3f} px; scans: {within}/{len(sel)} "
            f"within 3 sigma, {flagged} flagged, worst {max(abs(r[3]) for r in sel):.1f} sigma unflagged "
            f"{max([abs(r[3]) for r in sel if not r[4]], default=0.0):.1f}; photos: worst "
            f"{max(abs(r[5]) for r in sel):.2f} sigma"
        )


if __name__ == "__main__":
    main()
