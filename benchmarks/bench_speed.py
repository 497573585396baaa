"""Speed and memory of `scanmass measure` on a large scan, against plain baselines.

Run by hand from the repository root:

    python -m benchmarks.bench_speed [--repeat 3]

It renders (once, cached in benchmarks/.cache/) a 6000 x 4000 px, 300 dpi colour JPEG
scan with six parts, then times whole processes, each started fresh, interleaved (one
round runs every process once, then the next round), so that other load on the machine
falls on all of them alike:

- decode floor: the luma plane exactly as scanmass decodes it (pillow, the JPEG decoder
  asked for its luma channel alone with ``draft("L")``, then loaded into numpy);
- scikit-image baseline: that same luma plane, Otsu threshold, label, regionprops
  pixel-count area, centroid and central moments;
- OpenCV baseline: ``cv2.imread(IMREAD_GRAYSCALE)`` (the same luma plane; checked
  below), Otsu threshold, ``findContours`` (outer boundaries and holes), ``moments``
  of each contour, holes subtracted;
- scanmass: ``python -m scanmass measure FILE --quiet --json OUT``.

Before timing, the three decoders' planes are compared in this process (they must be
identical, else the floor is not the same work).

Printed: median wall time and peak resident memory (ru_maxrss of the child) of each
process, and the ratios. Targets (issue 2): scanmass <= 0.5 x the scikit-image
baseline's time, <= 2 x the decode floor's time, peak memory <= 2 x the decode floor's.
The machine's load average is printed before and after: timings on shared cores are
only indicative.
"""

from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

import cv2
import numpy as np
from PIL import Image

import scanmass
from scanmass import load_image
from scanmass.testing.scans import SynthPart, circle, l_section, rectangle, render_scan, save_scan

HERE = Path(__file__).resolve().parent
CACHE = HERE / ".cache"

DECODE_FLOOR = """
import sys
import numpy as np
from PIL import Image
with Image.open(sys.argv[1]) as im:
    im.draft("L", im.size)
    grey = np.asarray(im)
print(grey.shape)
"""

SKIMAGE_BASELINE = """
import sys
import numpy as np
from PIL import Image
from skimage import filters, measure
with Image.open(sys.argv[1]) as im:
    im.draft("L", im.size)
    grey = np.asarray(im)
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

OPENCV_BASELINE = """
import sys
import cv2
import numpy as np
grey = cv2.imread(sys.argv[1], cv2.IMREAD_GRAYSCALE)
t, _ = cv2.threshold(grey, 0, 255, cv2.THRESH_BINARY + cv2.THRESH_OTSU)
border = np.concatenate([grey[0], grey[-1], grey[:, 0], grey[:, -1]])
mode = cv2.THRESH_BINARY_INV if np.mean(border > t) > 0.5 else cv2.THRESH_BINARY
_, fg = cv2.threshold(grey, t, 255, mode)
contours, hierarchy = cv2.findContours(fg, cv2.RETR_CCOMP, cv2.CHAIN_APPROX_NONE)
s = 25.4 / 300
out = []
for k, c in enumerate(contours):
    if hierarchy[0, k, 3] != -1:
        continue  # a hole: taken with its outer boundary
    m = np.array([cv2.moments(c)[key] for key in ("m00", "m10", "m01", "m20", "m02", "m11")])
    child = hierarchy[0, k, 2]
    while child != -1:
        m -= [cv2.moments(contours[child])[key] for key in ("m00", "m10", "m01", "m20", "m02", "m11")]
        child = hierarchy[0, child, 0]
    if m[0] < 500:
        continue
    cx, cy = m[1] / m[0], m[2] / m[0]
    mu20, mu02, mu11 = m[3] - m[0] * cx * cx, m[4] - m[0] * cy * cy, m[5] - m[0] * cx * cy
    out.append((m[0] * s * s, (cx, cy), mu02 * s**4, mu20 * s**4, mu11 * s**4))
print(len(out))
"""


def make_scan(path: Path) -> None:
    """A 6000 x 4000 px, 300 dpi JPEG with six parts (rendered with exact coverage)."""
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


def same_luma(scan: Path) -> str:
    """Compare the decode floor's, OpenCV's and scanmass's luma planes of the scan."""
    with Image.open(scan) as im:
        im.draft("L", im.size)
        floor = np.asarray(im)
    planes: dict[str, np.ndarray | None] = {
        "cv2.imread GRAYSCALE": cv2.imread(str(scan), cv2.IMREAD_GRAYSCALE),
        "scanmass.load_image": load_image(scan).grey,
    }
    notes = []
    for name, plane in planes.items():
        if plane is None or plane.shape != floor.shape:
            raise SystemExit(
                f"{name} decodes {getattr(plane, 'shape', None)}, the floor {floor.shape}: not the same work"
            )
        diff = int(np.abs(plane.astype(int) - floor.astype(int)).max())
        notes.append(f"{name} {'identical' if diff == 0 else f'differs by up to {diff} levels'}")
    return "luma plane vs the decode floor: " + "; ".join(notes)


def run_measured(cmd: list[str], cwd: Path) -> tuple[float, float]:
    """Wall time (s) and peak RSS (MiB) of one fresh process."""
    wrapper = (
        "import resource, subprocess, sys, time\n"
        "t = time.perf_counter(); p = subprocess.run(sys.argv[1:], stdout=subprocess.DEVNULL)\n"
        "w = time.perf_counter() - t\n"
        "print(w, resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024, p.returncode)\n"
    )
    out = subprocess.run(
        [sys.executable, "-c", wrapper, *cmd], capture_output=True, text=True, check=True, cwd=cwd
    ).stdout.split()
    if int(out[2]) != 0:
        raise SystemExit(f"command failed: {' '.join(cmd)}")
    return float(out[0]), float(out[1])


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    root = Path(scanmass.__file__).resolve().parent.parent  # children import the same scanmass
    print(f"scanmass {scanmass.__version__} from {scanmass.__file__}")
    CACHE.mkdir(exist_ok=True)
    scan = CACHE / "speed-6000x4000.jpg"
    if not scan.exists():
        print("rendering the 6000 x 4000 scan (once) ...")
        make_scan(scan)
    print(same_luma(scan))
    load_before = os.getloadavg()
    with tempfile.TemporaryDirectory() as tmp:
        py = sys.executable
        cases = {
            "decode floor (pillow luma)": [py, "-c", DECODE_FLOOR, str(scan)],
            "skimage Otsu + regionprops": [py, "-c", SKIMAGE_BASELINE, str(scan)],
            "OpenCV Otsu + contours + moments": [py, "-c", OPENCV_BASELINE, str(scan)],
            "scanmass measure": [py, "-m", "scanmass", "measure", str(scan), "--quiet", "--json", f"{tmp}/r.json"],
        }
        walls: dict[str, list[float]] = {name: [] for name in cases}
        peaks: dict[str, list[float]] = {name: [] for name in cases}
        for _ in range(args.repeat):  # interleaved rounds
            for name, cmd in cases.items():
                w, p = run_measured(cmd, root)
                walls[name].append(w)
                peaks[name].append(p)
    load_after = os.getloadavg()
    res = {name: (statistics.median(walls[name]), max(peaks[name])) for name in cases}
    print(
        f"scan: {scan.name} ({scan.stat().st_size / 1e6:.1f} MB), median of {args.repeat} interleaved runs; "
        f"{os.cpu_count()} cores, load average {load_before[0]:.1f} before, {load_after[0]:.1f} after"
    )
    print(f"{'process':36s} {'wall s':>8s} {'peak MiB':>9s}")
    for name, (w, p) in res.items():
        print(f"{name:36s} {w:8.2f} {p:9.0f}")
    dec_t, dec_m = res["decode floor (pillow luma)"]
    sk_t, sk_m = res["skimage Otsu + regionprops"]
    cv_t, cv_m = res["OpenCV Otsu + contours + moments"]
    sm_t, sm_m = res["scanmass measure"]
    print(f"scanmass / skimage baseline time : {sm_t / sk_t:5.2f}  (target <= 0.50)")
    print(f"scanmass / OpenCV baseline time  : {sm_t / cv_t:5.2f}")
    print(f"scanmass / decode floor time     : {sm_t / dec_t:5.2f}  (target <= 2.00)")
    print(f"scanmass / decode floor peak     : {sm_m / dec_m:5.2f}  (target <= 2.00)")
    print(f"scanmass / skimage, OpenCV peak  : {sm_m / sk_m:5.2f}, {sm_m / cv_m:5.2f}")


if __name__ == "__main__":
    main()
