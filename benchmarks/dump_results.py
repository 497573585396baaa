"""Write the full result JSON of a fixed set of images, to compare byte for byte across a change.

Run by hand from the repository root:

    python -m benchmarks.dump_results OUT_DIR [--cases 30 --seed 1]
    diff -r BEFORE_DIR AFTER_DIR

A speed change must leave every figure, warning and outline identical. The set: the
rendered cases of ``bench_accuracy --cases N --seed S`` (the same random stream, measured
as that benchmark measures them), bench_speed's 6000 x 4000 scan (with and without
``split_touching``), the demo's sample images, the path-traced set in ``tests/data/reallight``
(measured as bench_reallight measures them, without thickness) and the touching-parts
scenes of ``tests/test_touching.py`` (with and without ``split_touching``). A case that
raises a ScanmassError writes its message instead.
"""

from __future__ import annotations

import argparse
import json
from pathlib import Path

import numpy as np

import scanmass
from benchmarks import bench_accuracy, bench_reallight, bench_speed
from scanmass.errors import ScanmassError
from scanmass.testing.scans import SynthPart, circle, rectangle, render_scan

ROOT = Path(__file__).resolve().parent.parent


def _write(out: Path, name: str, source, **options) -> None:
    try:
        text = scanmass.measure(source, **options).to_json()
    except ScanmassError as exc:
        text = f"error: {exc}\n"
    (out / f"{name}.json").write_text(text)


def _touching_scenes():
    for gap_mm, dpi in [(0.2, 100), (0.05, 300), (0.2, 300)]:
        parts = [
            SynthPart(rectangle(10.0, 10.0, 40.0, 30.0), [circle(28.0, 25.0, 6.0)]),
            SynthPart(rectangle(50.0 + gap_mm, 10.0, 30.0, 30.0)),
        ]
        scan = render_scan(parts, dpi=dpi, size_mm=(92.0, 50.0), blur_px=0.8, noise=0.003, seed=1)
        yield f"plates-{gap_mm}-{dpi}", scan.image, dpi
    discs = [SynthPart(circle(20.0, 20.0, 10.0)), SynthPart(circle(40.05, 20.0, 10.0))]
    yield "discs", render_scan(discs, dpi=300, size_mm=(80.0, 40.0), blur_px=0.8, noise=0.003, seed=2).image, 300
    apart = [
        SynthPart(rectangle(10.0, 10.0, 30.0, 20.0), [circle(20.0, 20.0, 4.0)]),
        SynthPart(circle(60.0, 20.0, 9.0)),
    ]
    yield "apart", render_scan(apart, dpi=300, size_mm=(80.0, 40.0), blur_px=0.9, noise=0.005, seed=3).image, 300
    img = np.full((300, 460), 235, np.uint8)
    img[40:260, 60:160] = 25
    img[160:260, 60:400] = 25
    yield "l-bracket", img, 300


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("out", type=Path)
    parser.add_argument("--cases", type=int, default=30)
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--skip-large", action="store_true", help="leave out the 6000 x 4000 scan")
    args = parser.parse_args()
    out: Path = args.out
    out.mkdir(parents=True, exist_ok=True)
    print(f"scanmass {scanmass.__version__} from {scanmass.__file__}")
    rng = np.random.default_rng(args.seed)
    for k in range(args.cases):
        case = bench_accuracy._make_case(rng, k)
        img = bench_accuracy._render(case, rng)
        _write(out, f"accuracy-{k:03d}", img, dpi=case.dpi, dpi_rel_u=0.0, min_area_mm2=0.5)
    if not args.skip_large:
        bench_speed.CACHE.mkdir(exist_ok=True)
        scan = bench_speed.CACHE / "speed-6000x4000.jpg"
        if not scan.exists():
            bench_speed.make_scan(scan)
        _write(out, "speed-scan", scan)
        _write(out, "speed-scan-split", scan, split_touching=True)
    samples = ROOT / "samples"
    for path in sorted(samples.glob("wrenfield-*.*")):
        if path.suffix not in (".jpg", ".png"):
            continue
        options = {"printed_x_mm": 100.4, "printed_y_mm": 99.7} if "on-mat" in path.name else {}
        _write(out, f"sample-{path.stem}", path, **options)
    for path in sorted((ROOT / "tests" / "data" / "reallight").glob("*.jpg")):
        truth = json.loads(path.with_suffix(".json").read_text())
        options = {"dpi": bench_reallight.effective_dpi(truth)} if truth["kind"] == "scan" else {}
        _write(out, f"reallight-{path.stem}", path, **options)
    for name, img, dpi in _touching_scenes():
        _write(out, f"touch-{name}", img, dpi=dpi)
        _write(out, f"touch-{name}-split", img, dpi=dpi, split_touching=True)
    print(f"{len(list(out.glob('*.json')))} results in {out}")


if __name__ == "__main__":
    main()
