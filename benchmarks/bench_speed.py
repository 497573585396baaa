"""Speed and memory of `scanmass measure` on a large scan, against plain baselines.

Run by hand from the repository root:

    python benchmarks/bench_speed.py [--repeat 3]

It renders (once, cached in benchmarks/.cache/) a 6000 x 4000 px JPEG scan with several
parts, then times whole processes, each started fresh:

- decode only: pillow opens and decodes the JPEG (the floor any tool pays);
- baseline: a plain approach (scikit-image: decode, rgb2gray, Otsu threshold, label,
  regionprops pixel-count area, centroid and moments);
- scanmass: `python -m scanmass measure FILE --quiet --json OUT`.

Printed: median wall time, peak resident memory (ru_maxrss of the child), and the ratios.
Targets (issue 2): scanmass <= 0.5 x baseline time, <= 2 x decode-only time, peak memory
<= 2 x decode-only.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

HERE = Path(__file__).resolve().parent
CACHE = HERE / ".cache"

DECODE_ONLY = """
import sys
from PIL import Image
with Image.open(sys.argv[1]) as im:
    im.load()
"""

BASELINE = """
import sys
import numpy as np
from skimage import io, color, filters, measure
img = io.imread(sys.argv[1])
grey = color.rgb2gray(img) if img.ndim == 3 else img / 255.0
t = filters.threshold_otsu(grey)
border = np.concatenate([grey[0], grey[-1], grey[:, 0], grey[:, -1]])
fg = grey < t if np.mean(border > t) > 0.5 else grey > t
labels = measure.label(fg)
s = 25.4 / 300
out = []
for r in measure.regionprops(labels):
    if r.area < 500:
        continue
    mu = r.moments_central
    out.append((r.area * s * s, r.centroid, mu[2, 0] * s**4, mu[0, 2] * s**4, mu[1, 1] * s**4))
print(len(out))
"""


def make_scan(path: Path) -> None:
    """A 6000 x 4000 px, 300 dpi JPEG with six parts (rendered with exact coverage)."""
    from scanmass.testing.scans import SynthPart, circle, l_section, rectangle, render_scan, save_scan

    parts = [
        SynthPart(rectangle(40, 60, 180, 120, angle_deg=7), [circle(90, 120, 12), circle(170, 130, 20)]),
        SynthPart(circle(330, 120, 60), [circle(330, 120, 15)]),
        SynthPart(l_section(40, 220, 150, 90, 20)),
        SynthPart(rectangle(250, 230, 120, 60, angle_deg=-15), [circle(310, 260, 8)]),
        SynthPart(circle(440, 80, 30)),
        SynthPart(circle(440, 260, 40), [circle(440, 260, 30)]),
    ]
    scan = render_scan(
        parts, dpi=300, shape_px=(4000, 6000), blur_px=1.0, noise=0.006, illumination=(0.05, -0.03), colour=True, seed=5
    )
    save_scan(scan, path, quality=92)


def run_measured(code_or_cmd: list[str]) -> tuple[float, float]:
    wrapper = (
        "import resource, subprocess, sys, time\n"
        "t = time.perf_counter(); p = subprocess.run(sys.argv[1:], stdout=subprocess.DEVNULL)\n"
        "w = time.perf_counter() - t\n"
        "print(w, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024, p.returncode)\n"
    )
    out = subprocess.run(
        [sys.executable, "-c", wrapper, *code_or_cmd], capture_output=True, text=True, check=True
    ).stdout.split()
    if int(out[2]) != 0:
        raise SystemExit(f"command failed: {' '.join(code_or_cmd)}")
    return float(out[0]), float(out[1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    CACHE.mkdir(exist_ok=True)
    scan = CACHE / "speed-6000x4000.jpg"
    if not scan.exists():
        print("rendering the 6000 x 4000 scan (once) ...")
        make_scan(scan)
    with tempfile.TemporaryDirectory() as tmp:
        cases = {
            "decode only": [sys.executable, "-c", DECODE_ONLY, str(scan)],
            "baseline (skimage Otsu + regionprops)": [sys.executable, "-c", BASELINE, str(scan)],
            "scanmass measure": [
                sys.executable,
                "-m",
                "scanmass",
                "measure",
                str(scan),
                "--quiet",
                "--json",
                os.path.join(tmp, "r.json"),
            ],
        }
        results = {}
        for name, cmd in cases.items():
            walls, peaks = [], []
            for _ in range(args.repeat):
                w, p = run_measured(cmd)
                walls.append(w)
                peaks.append(p)
            results[name] = (statistics.median(walls), max(peaks))
    dec_t, dec_m = results["decode only"]
    base_t, base_m = results["baseline (skimage Otsu + regionprops)"]
    sm_t, sm_m = results["scanmass measure"]
    print(f"scan: {scan.name} ({scan.stat().st_size / 1e6:.1f} MB), median of {args.repeat} runs")
    print(f"{'process':40s} {'wall s':>8s} {'peak MiB':>9s}")
    for name, (w, p) in results.items():
        print(f"{name:40s} {w:8.2f} {p:9.0f}")
    print(f"scanmass / baseline time   : {sm_t / base_t:5.2f}  (target <= 0.50)")
    print(f"scanmass / decode-only time: {sm_t / dec_t:5.2f}  (target <= 2.00)")
    print(f"scanmass / decode-only peak: {sm_m / dec_m:5.2f}  (target <= 2.00)")


if __name__ == "__main__":
    main()
