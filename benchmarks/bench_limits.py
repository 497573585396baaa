"""Thin walls, narrow slots and untagged files (issue 12): errors and coverage on rendered scans.

Run by hand from the repository root:

    python -m benchmarks.bench_limits [--seed 1] [--quick]

Cases (scanmass.testing.scans: exact pixel coverage, Gaussian blur, noise), all measured
with ``dpi_rel_u = 0`` so that sigma holds the image terms only:

- *fin+slot*: a 12 x 8 mm plate with a fin (a wall) 5 mm long standing out of it and a
  slot (a hole) 4 mm long, both ``w`` px wide, rotated 7 degrees: the plate gives the
  part's own level. The error is judged against the area of the fin and the slot
  (2 x w x 4.5 mm, the thin features' own area), the issue's "within x % of their area".
  The *thin-only* column takes out the plate's own error (its corners and straight edges,
  from the same render of the plate alone, the same noise draw): what the fin and slot
  add, which is what the issue's targets (3 px and more: 0.5 %; 2 px: 2 %) are about.
  Where the blur closes the 2 px slot or the 2 px fin has no 0.5 contour, both are
  measured from their closed profiles (scanmass.segment.closedfeat: a strip along the
  ridge line, its width the integral across it) and added to or taken out of the figures.
- *ring*: a ring of radius 8 mm with a ``w`` px wall, no thick region anywhere: the level
  comes from the walls' own profiles (or the ring is reported unresolved).

Walls of 2, 3, 4 and 6 px; 300 and 600 dpi; blur 0.5-1.5 px; dark-on-light and
light-on-dark; sRGB-encoded 8-bit arrays, linear-light float arrays (a tagged linear
file: the render's linear light with the same noise draw, unquantised) and 16-bit sRGB
arrays (their own random draws); clean (noise 0) and noisy (0.004, without --quick). Truth: shapely's area of the rendered polygon.
Untagged files: linear-light renders saved as PNG without a colour chunk; each must get
the warning or the right reading.
"""

from __future__ import annotations

import argparse
import math
import tempfile
from pathlib import Path

import numpy as np
from shapely.geometry import Polygon

import scanmass
from scanmass import ScanmassError, measure
from scanmass.testing.scans import SynthPart, circle, rectangle, render_scan, save_scan


def fin_and_slot(dpi: float, wall_px: float) -> tuple[SynthPart, float]:
    px = 25.4 / dpi
    w = wall_px * px
    outer = np.array(
        [[5, 5], [17, 5], [17, 13], [11 + w / 2, 13], [11 + w / 2, 18], [11 - w / 2, 18], [11 - w / 2, 13], [5, 13]],
        float,
    )
    slot = rectangle(7.0, 7.0, w, 4.0)
    a = math.radians(7.0)
    rot = np.array([[math.cos(a), -math.sin(a)], [math.sin(a), math.cos(a)]])
    c = np.array([11.0, 11.0])
    outer = (outer - c) @ rot.T + c
    slot = (slot - c) @ rot.T + c
    return SynthPart(outer, [slot]), 2 * w * 4.5


def plate_alone(dpi: float, wall_px: float) -> SynthPart:
    """The fin+slot case's plate without its fin and slot: its own error (corners, straight
    edges) is taken out of the fin+slot error in the thin-only column."""
    outer = np.array([[5, 5], [17, 5], [17, 13], [5, 13]], float)
    a = math.radians(7.0)
    rot = np.array([[math.cos(a), -math.sin(a)], [math.sin(a), math.cos(a)]])
    c = np.array([11.0, 11.0])
    return SynthPart((outer - c) @ rot.T + c, [])


def ring(dpi: float, wall_px: float) -> tuple[SynthPart, float]:
    w = wall_px * 25.4 / dpi
    part = SynthPart(circle(15.0, 15.0, 8.0), [circle(15.0, 15.0, 8.0 - w)])
    return part, Polygon(part.outer_mm, part.holes_mm).area


def _linear_plane(scan, noise: float, seed: int) -> np.ndarray:
    """What a tagged linear float file of ``scan`` holds: its linear light plus the render's
    own noise draw (scanmass.testing.scans adds ``normal(0, noise)`` from ``seed`` after the
    blur, then clips to 0-1), without the encoding and rounding. (``scan.linear`` alone is
    noise-free: the noisy linear rows were clean before.)"""
    plane = scan.linear.astype(np.float64)
    if noise > 0:
        plane = plane + np.random.default_rng(seed).normal(0.0, noise, plane.shape)
    return np.clip(plane, 0.0, 1.0)


def _measure_row(img, family, wall_px, dpi, polarity, encoding, noise, truth, thin_area, plate_err=None) -> tuple:
    try:
        m = measure(img, dpi=dpi, dpi_rel_u=0.0, min_area_mm2=0.1)
    except ScanmassError as exc:
        return (family, wall_px, dpi, polarity, encoding, noise, None, None, None, str(exc), None)
    p = max(m.parts, key=lambda q: q.area_mm2)
    err = p.area_mm2 - truth
    z = abs(err) / p.area_u_mm2 if p.area_u_mm2 > 0 else math.inf
    warned = any("thin" in w for w in m.warnings)
    own = None if plate_err is None else (err - plate_err) / thin_area
    return (family, wall_px, dpi, polarity, encoding, noise, err / thin_area, z, warned, "", own)


def _plate_error(img, dpi, truth) -> float | None:
    try:
        m = measure(img, dpi=dpi, dpi_rel_u=0.0, min_area_mm2=0.1)
    except ScanmassError:
        return None
    return max(m.parts, key=lambda q: q.area_mm2).area_mm2 - truth


def _table(title: str, rows: list[tuple]) -> None:
    print(f"  {title}")
    print(
        "  family     wall  n   median|e| %   max|e| %   within 3 sigma %   max z   warned   thin-only median|e| / max|e| %"
    )
    for family in ("fin+slot", "ring"):
        for wall_px in (2, 3, 4, 6):
            sel = [r for r in rows if r[0] == family and r[1] == wall_px and r[6] is not None]
            failed = [r for r in rows if r[0] == family and r[1] == wall_px and r[6] is None]
            if not sel:
                if failed:
                    print(f"  {family:9s} {wall_px:4d}   all failed: {failed[0][9]}")
                continue
            e = np.array([abs(r[6]) for r in sel]) * 100
            z = np.array([r[7] for r in sel])
            warned = sum(1 for r in sel if r[8])
            own = np.array([abs(r[10]) for r in sel if r[10] is not None]) * 100
            print(
                f"  {family:9s} {wall_px:4d} {len(sel):3d} {np.median(e):12.3f} {e.max():10.3f} "
                f"{100 * np.mean(z <= 3):17.0f} {z.max():7.2f} {warned:5d}/{len(sel)}"
                + (f"   {np.median(own):8.3f} / {own.max():.3f}" if own.size else "")
                + (f"  ({len(failed)} failed)" if failed else "")
            )


def _rows(rng: np.random.Generator, encodings: tuple[str, ...], bit_depth: int, noises: tuple[float, ...]) -> list:
    """Render and measure every case for ``encodings``: "srgb" and "srgb16" are the stored
    values, "linear" the float linear-light plane (a tagged linear file)."""
    rows = []
    for family in ("fin+slot", "ring"):
        for wall_px in (2, 3, 4, 6):
            for dpi in (300, 600):
                for polarity in ("dark", "light"):
                    for encoding in encodings:
                        for noise in noises:
                            blur = float(rng.uniform(0.5, 1.5))
                            part, thin_area = (fin_and_slot if family == "fin+slot" else ring)(dpi, wall_px)
                            truth = Polygon(part.outer_mm, part.holes_mm).area
                            fg, bg = (0.06, 0.8) if polarity == "dark" else (0.65, 0.04)
                            settings = dict(
                                dpi=dpi, size_mm=(30, 30) if family == "ring" else (22, 23), blur_px=blur,
                                noise=noise, background=bg, foreground=fg, encoding="srgb", bit_depth=bit_depth,
                                seed=int(rng.integers(1 << 30)),
                            )  # fmt: skip
                            scan = render_scan([part], **settings)  # type: ignore[arg-type]
                            seed = settings["seed"]
                            img = _linear_plane(scan, noise, seed) if encoding == "linear" else scan.image  # type: ignore[arg-type]
                            plate_err = None
                            if family == "fin+slot":  # the same render of the plate alone (same noise draw)
                                plate = plate_alone(dpi, wall_px)
                                alone = render_scan([plate], **settings)  # type: ignore[arg-type]
                                plate_img = _linear_plane(alone, noise, seed) if encoding == "linear" else alone.image  # type: ignore[arg-type]
                                plate_err = _plate_error(plate_img, dpi, Polygon(plate.outer_mm).area)
                            rows.append(
                                _measure_row(
                                    img, family, wall_px, dpi, polarity, encoding, noise, truth, thin_area, plate_err
                                )
                            )
    return rows


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--quick", action="store_true", help="one blur and noise level per case")
    parser.add_argument("--rows", action="store_true", help="print every thin-feature row too")
    args = parser.parse_args()
    print(f"scanmass {scanmass.__version__} from {scanmass.__file__}")
    noises = (0.0,) if args.quick else (0.0, 0.004)
    rng = np.random.default_rng(args.seed)  # the untagged-file cases below continue its stream
    rows = _rows(rng, ("srgb", "linear"), 8, noises)
    # 16-bit sRGB files (a scanner's 48-bit colour or 16-bit grey output), clean and noisy;
    # their own random draws, so that the rows above stay those of earlier runs
    rows += _rows(np.random.default_rng(args.seed + 1000), ("srgb16",), 16, noises)
    print("\nthin features: relative area error against the thin features' own area (fin+slot) or the ring's")
    groups = [("all rows", rows)]
    groups += [(f"encoding {enc}", [r for r in rows if r[4] == enc]) for enc in ("srgb", "linear", "srgb16")]
    groups += [(f"noise {nz:g}", [r for r in rows if r[5] == nz]) for nz in sorted({r[5] for r in rows})]
    for title, group in groups:
        if group:
            _table(title, group)
    if args.rows:
        print("\nrows: family, wall px, dpi, polarity, encoding, noise, error %, z, warned, thin-only error %")
        for r in rows:
            if r[6] is None:
                print("   ", r[:6], "failed:", r[9])
            else:
                own = "" if r[10] is None else f"{100 * r[10]:+.3f}"
                print("   ", r[:6], f"{100 * r[6]:+.3f} {r[7]:.2f} {r[8]} {own}")
    beyond = [r for r in rows if r[7] is not None and r[7] > 5 and not r[8]]
    print(f"cases beyond 5 sigma without a warning: {len(beyond)}")
    for r in beyond:
        print("   ", r[:6], f"e {100 * r[6]:+.2f} % z {r[7]:.1f}")

    # untagged linear files
    print("\nuntagged linear-light PNG files (no colour chunk): warning or right reading")
    ok = total = 0
    with tempfile.TemporaryDirectory() as tmp:
        for k in range(8 if args.quick else 16):
            polarity = "dark" if k % 2 == 0 else "light"
            fg, bg = (0.06, 0.8) if polarity == "dark" else (0.65, 0.04)
            size = float(rng.uniform(6, 20))
            part = SynthPart(rectangle(5, 5, size, size * 0.6, angle_deg=float(rng.uniform(0, 90))), [])
            truth = Polygon(part.outer_mm).area
            scan = render_scan(
                [part], dpi=300, size_mm=(size * 1.6 + 10, size * 1.6 + 10), blur_px=float(rng.uniform(0.5, 1.5)),
                noise=0.002, background=bg, foreground=fg, encoding="linear", bit_depth=8 if k < 8 else 16,
                seed=int(rng.integers(1 << 30)),
            )  # fmt: skip
            path = save_scan(scan, Path(tmp) / f"lin{k}.png")
            try:
                m = measure(path, dpi_rel_u=0.0)
            except ScanmassError as exc:  # e.g. a turned part reaching the image edge
                print(f"  {k:2d} {scan.image.dtype.name:6s} {polarity:5s} failed: {exc}")
                continue
            p = m.parts[0]
            right = abs(p.area_mm2 - truth) <= 3 * p.area_u_mm2
            warned = any("colour profile" in w for w in m.warnings)
            total += 1
            ok += right or warned
            print(
                f"  {k:2d} {scan.image.dtype.name:6s} {polarity:5s} area error {100 * (p.area_mm2 / truth - 1):+.3f} %  "
                f"{'warned' if warned else 'no warning'}{'' if not right else ', right reading'}"
            )
    print(f"untagged linear files with the warning or the right reading: {ok}/{total}")


if __name__ == "__main__":
    main()
