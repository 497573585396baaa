"""Speed and memory of `scanmass measure` on a large scan, against plain baselines.

Run by hand from the repository root:

    python -m benchmarks.bench_speed [--repeat 3]

It renders (once, cached in benchmarks/.cache/) a 6000 x 4000 px, 300 dpi colour JPEG
scan with six parts, then times whole processes, each started fresh, interleaved (one
round runs every process once, then the next round), so that other load on the machine
falls on all of them alike. One unmeasured run of each comes first, and the children may
keep compiled bytecode (``PYTHONDONTWRITEBYTECODE`` is dropped from their environment):
an installed wheel ships it, a checkout would otherwise compile the package at every start.

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
process, and the ratios; ``scanmass --version`` alone (Python start-up and the CLI's
imports). Then, in this process with everything imported and one measure done (what a
``batch`` worker or the bench page pays per image), the median of ``--warm`` interleaved
pairs: the same luma decode, then ``scanmass.measure(FILE)``.

Optional parts:

- ``--batch N``: N A4 scans at 300 dpi (bench_batch's cache and scenes, PNG unless
  ``--batch-format jpg``) through ``run_batch`` with 1 and 2 worker processes, files per
  second of each, and the decode-only rate of the same folder (the luma plane of every
  file decoded in one process, nothing else);
- ``--photo``: a 4000 x 3000 px (12 MP) JPEG photo of a part on the A4 marker mat
  (bench_photo's camera and part generator, tilted), warm: its luma decode against
  ``measure(FILE)`` with markers, homography and the sampled scale uncertainty.

Each target of issue 16 is printed as figure, ratio and target:

- whole process: scanmass <= 2.5 x the decode process's time, <= 0.3 x the
  scikit-image baseline's, peak memory <= 1.5 x the decode process's;
- warm: ``measure()`` <= 2 x the in-process luma decode of the same file;
- batch: 2 workers >= 1.9 x one worker (files per second beside the decode-only rate);
- photo: warm ``measure()`` of the 12 MP mat photo <= 3 x its decode.

The machine's load average is printed before and after: timings on shared cores are
only indicative.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

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


#: The children's environment: Python may keep the bytecode it compiles (``__pycache__``), as
#: an installed wheel ships it; with ``PYTHONDONTWRITEBYTECODE`` set every start of a checkout
#: compiles the package again (~0.08 s), which no installed copy pays.
CHILD_ENV = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}


def run_measured(cmd: list[str], cwd: Path) -> tuple[float, float, float]:
    """Wall time (s), peak RSS (MiB) and CPU time (user + system, s) of one fresh process."""
    wrapper = (
        "import resource, subprocess, sys, time\n"
        "t = time.perf_counter(); p = subprocess.run(sys.argv[1:], stdout=subprocess.DEVNULL)\n"
        "w = time.perf_counter() - t\n"
        "u = resource.getrusage(resource.RUSAGE_CHILDREN)\n"
        "print(w, u.ru_maxrss / 1024, p.returncode, u.ru_utime + u.ru_stime)\n"
    )
    out = subprocess.run(
        [sys.executable, "-c", wrapper, *cmd], capture_output=True, text=True, check=True, cwd=cwd, env=CHILD_ENV
    ).stdout.split()
    if int(out[2]) != 0:
        raise SystemExit(f"command failed: {' '.join(cmd)}")
    return float(out[0]), float(out[1]), float(out[3])


def luma_decode(path: Path) -> np.ndarray:
    """The decode floor in this process: the file's luma plane as scanmass decodes it."""
    with Image.open(path) as im:
        if im.mode in ("RGB", "YCbCr") and im.format == "JPEG":
            im.draft("L", im.size)
        return np.asarray(im if im.mode == "L" else im.convert("L"))


def warm_pair(path: Path, rounds: int, **options: Any) -> tuple[float, float, float, float]:
    """Median in-process luma decode and ``measure(path)``, interleaved, after one warm-up.

    Returns wall seconds of both, then CPU seconds (this process, all threads) of both.
    """
    from scanmass import measure

    measure(path, **options)
    dec, meas, dec_cpu, meas_cpu = [], [], [], []
    for _ in range(rounds):
        t, c = time.perf_counter(), time.process_time()
        luma_decode(path)
        dec.append(time.perf_counter() - t)
        dec_cpu.append(time.process_time() - c)
        t, c = time.perf_counter(), time.process_time()
        measure(path, **options)
        meas.append(time.perf_counter() - t)
        meas_cpu.append(time.process_time() - c)
    med = [statistics.median(v) for v in (dec, meas, dec_cpu, meas_cpu)]
    return med[0], med[1], med[2], med[3]


def target_line(what: str, figure: str, ratio: float, op: str, target: float) -> str:
    met = ratio <= target if op == "<=" else ratio >= target
    return f"  {what:44s} {figure:>34s}  ratio {ratio:5.2f}  target {op} {target:<4g} {'met' if met else 'NOT met'}"


def run_batch_part(n: int, fmt: str) -> list[str]:
    """1 and 2 workers on n A4 scans, and the decode-only rate of the same folder."""
    from benchmarks.bench_batch import _subset, ensure_scans
    from scanmass import run_batch

    scans = ensure_scans(HERE / ".cache" / f"batch-a4-300dpi-{fmt}", n, fmt)
    work = Path(tempfile.mkdtemp(prefix="scanmass-bench-speed-"))
    try:
        folder = _subset(scans, n, fmt, work / "scans")
        files = sorted(folder.iterdir())
        for f in files[:2]:  # warm the page cache
            luma_decode(f)
        t = time.perf_counter()
        for f in files:
            luma_decode(f)
        decode_rate = n / (time.perf_counter() - t)
        rates = {}
        for workers in (1, 2):
            out = work / f"out{workers}"
            shutil.rmtree(out, ignore_errors=True)
            t = time.perf_counter()
            summary = run_batch(folder, out, workers=workers)
            rates[workers] = (summary.measured + summary.failed) / (time.perf_counter() - t)
            if summary.failed:
                print(f"  {summary.failed} file(s) failed with {workers} worker(s)")
    finally:
        shutil.rmtree(work, ignore_errors=True)
    print(
        f"batch, {n} A4 scans at 300 dpi ({fmt}): 1 worker {rates[1]:.2f} files/s, 2 workers {rates[2]:.2f} files/s; "
        f"decode only (one process) {decode_rate:.2f} files/s; load average {os.getloadavg()[0]:.1f}"
    )
    return [
        target_line(
            f"batch ({n} A4 {fmt}): 2 workers vs 1",
            f"{rates[2]:.2f} vs {rates[1]:.2f} files/s",
            rates[2] / rates[1],
            ">=",
            1.9,
        )
    ]


def make_photo(path: Path) -> None:
    """A 4000 x 3000 px JPEG (quality 92) of a part on the A4 marker mat, tilted."""
    from benchmarks.bench_photo import F_FRAMING_PX, MAT, camera, shapes
    from scanmass.testing.photos import PhotoParts, render_photo

    rng = np.random.default_rng(2024)
    outer, holes = shapes(rng)
    cam = camera(rng, (4000, 3000), F_FRAMING_PX, 0.0)
    grey = render_photo(MAT, [PhotoParts(outer, holes)], cam, seed=0, blur_px=1.3, noise=0.008, light=(0.2, -0.15))
    Image.fromarray(np.dstack([grey] * 3)).save(path, "JPEG", quality=92)


def run_photo_part(rounds: int) -> list[str]:
    photo = CACHE / "speed-photo-4000x3000.jpg"
    if not photo.exists():
        print("rendering the 12 MP mat photo (once) ...")
        make_photo(photo)
    dec, meas, dec_c, meas_c = warm_pair(photo, rounds, printed_x_mm=100.0, printed_y_mm=100.0)
    print(
        f"photo {photo.name}, warm, median of {rounds}: luma decode {dec:.3f} s, measure() {meas:.3f} s "
        f"(CPU {dec_c:.3f} and {meas_c:.3f} s, ratio {meas_c / dec_c:.2f}); load average {os.getloadavg()[0]:.1f}"
    )
    return [
        target_line(
            "photo 12 MP on the mat, warm: measure / decode", f"{meas:.3f} vs {dec:.3f} s", meas / dec, "<=", 3.0
        )
    ]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=3, help="interleaved rounds of the whole processes")
    parser.add_argument("--warm", type=int, default=5, help="interleaved in-process decode + measure pairs")
    parser.add_argument("--batch", type=int, default=0, metavar="N", help="also run N A4 scans through batch")
    parser.add_argument("--batch-format", choices=["png", "jpg"], default="png")
    parser.add_argument("--photo", action="store_true", help="also time a 12 MP mat photo, warm")
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
            "scanmass --version": [py, "-m", "scanmass", "--version"],
        }
        # one unmeasured run of each: the bytecode compiled and kept, the file in the page cache
        for cmd in cases.values():
            run_measured(cmd, root)
        walls: dict[str, list[float]] = {name: [] for name in cases}
        peaks: dict[str, list[float]] = {name: [] for name in cases}
        cpus: dict[str, list[float]] = {name: [] for name in cases}
        for _ in range(args.repeat):  # interleaved rounds
            for name, cmd in cases.items():
                w, p, c = run_measured(cmd, root)
                walls[name].append(w)
                peaks[name].append(p)
                cpus[name].append(c)
    load_after = os.getloadavg()
    res = {name: (statistics.median(walls[name]), max(peaks[name])) for name in cases}
    cpu = {name: statistics.median(cpus[name]) for name in cases}
    print(
        f"scan: {scan.name} ({scan.stat().st_size / 1e6:.1f} MB), median of {args.repeat} interleaved runs after "
        "one unmeasured run of each (bytecode kept, as an installed wheel has it); "
        f"{os.cpu_count()} cores, load average {load_before[0]:.1f} before, {load_after[0]:.1f} after"
    )
    print(f"{'process':36s} {'wall s':>8s} {'peak MiB':>9s} {'CPU s':>7s}")
    for name, (w, p) in res.items():
        print(f"{name:36s} {w:8.2f} {p:9.0f} {cpu[name]:7.2f}")
    dec_t, dec_m = res["decode floor (pillow luma)"]
    sk_t, sk_m = res["skimage Otsu + regionprops"]
    cv_t, cv_m = res["OpenCV Otsu + contours + moments"]
    sm_t, sm_m = res["scanmass measure"]
    print(f"scanmass / OpenCV baseline time, peak: {sm_t / cv_t:5.2f}, {sm_m / cv_m:5.2f}")
    print(f"scanmass / skimage baseline peak: {sm_m / sk_m:5.2f}")

    dec_c, sk_c, sm_c = (
        cpu[k] for k in ("decode floor (pillow luma)", "skimage Otsu + regionprops", "scanmass measure")
    )
    print(
        f"CPU time (less sensitive to other load): scanmass / decode process {sm_c / dec_c:5.2f}, "
        f"scanmass / skimage baseline {sm_c / sk_c:5.2f}"
    )

    w_dec, w_meas, w_dec_c, w_meas_c = warm_pair(scan, args.warm)
    print(
        f"warm, in this process, median of {args.warm} interleaved pairs: luma decode {w_dec:.3f} s, "
        f"measure() {w_meas:.3f} s (CPU {w_dec_c:.3f} and {w_meas_c:.3f} s, ratio {w_meas_c / w_dec_c:.2f}); "
        f"load average {os.getloadavg()[0]:.1f}"
    )
    lines = [
        target_line(
            "whole process: scanmass / decode process", f"{sm_t:.2f} vs {dec_t:.2f} s", sm_t / dec_t, "<=", 2.5
        ),
        target_line(
            "whole process: scanmass / skimage baseline", f"{sm_t:.2f} vs {sk_t:.2f} s", sm_t / sk_t, "<=", 0.3
        ),
        target_line(
            "peak memory: scanmass / decode process", f"{sm_m:.0f} vs {dec_m:.0f} MiB", sm_m / dec_m, "<=", 1.5
        ),
        target_line(
            "warm: measure() / in-process luma decode", f"{w_meas:.3f} vs {w_dec:.3f} s", w_meas / w_dec, "<=", 2.0
        ),
    ]
    if args.batch:
        lines += run_batch_part(args.batch, args.batch_format)
    if args.photo:
        lines += run_photo_part(args.warm)
    print("issue 16 targets (figure, ratio, target):")
    print("\n".join(lines))


if __name__ == "__main__":
    main()
