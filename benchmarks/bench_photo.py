"""Accuracy of photos on the A4 marker mat (run by hand; prints figures and ratios).

    python -m benchmarks.bench_photo [--n 10] [--width 4000] [--height 3000]

Rendered photos (scanmass.testing.photos: exact pixel coverage through a pinhole camera,
blur, noise, uneven light, JPEG 92) of parts at random places and angles in the clear
area, tilts 0-30 degrees, any roll, about 0.1 mm per px at 4000 x 3000 px (the same
framing at other sizes, so 0.26 mm per px at 1600 x 1200). Three
conditions: a plain pinhole lens; k1 = -0.05 with a lens profile calibrated from six
views; a 6 mm thick part with and without --thickness. Printer check values given.
Targets (issue 3): median centroid error <= 0.05 mm, median area error <= 0.1 %,
second moments <= 0.3 %, >= 90 % of errors within 3 stated sigma; 6 mm part with
--thickness: area error <= 0.2 %.
"""

from __future__ import annotations

import argparse
import math
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from PIL import Image

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))
from polygon_truth import truth  # noqa: E402

import scanmass  # noqa: E402
from scanmass import make_mat, measure  # noqa: E402
from scanmass.scale.lens import calibrate_lens  # noqa: E402
from scanmass.testing.photos import PhotoParts, make_camera, render_photo  # noqa: E402
from scanmass.testing.scans import circle, l_section, rectangle, rotate  # noqa: E402

MAT = make_mat("a4-portrait")
#: Focal length (px) of the 4000 px wide default photo; camera distances are set from it so
#: that every image size frames the whole mat alike (smaller images: coarser mm per px).
F_FRAMING_PX = 3300.0


def shapes(rng):
    kind = rng.integers(3)
    cx, cy = rng.uniform(92, 128), rng.uniform(105, 185)
    a = rng.uniform(0, 180)
    if kind == 0:
        outer, holes = (
            rectangle(cx - 40, cy - 25, 80, 50),
            [circle(cx - 10, cy, 8, 256), circle(cx + 22, cy + 8, 5, 256)],
        )
    elif kind == 1:
        outer, holes = l_section(cx - 35, cy - 30, 70, 60, 12), [circle(cx - 29, cy + 20, 3.5, 256)]
    else:
        outer, holes = circle(cx, cy, 32, 512), [circle(cx + 3, cy, 10, 256)]
    return rotate(outer, a, about_mm=(cx, cy)), [rotate(h, a, about_mm=(cx, cy)) for h in holes]


def camera(rng, size, f_px, k1=0.0):
    return make_camera(
        size=size,
        f_px=f_px,
        target_mm=(105 + rng.uniform(-5, 5), 148 + rng.uniform(-5, 5)),
        distance_mm=F_FRAMING_PX * 0.1 * 1.05,
        tilt_deg=rng.uniform(0, 30),
        tilt_dir_deg=rng.uniform(0, 360),
        roll_deg=90 + rng.uniform(-20, 20),
        k1=k1,
    )


def run(condition, n, size, f_px, rng, profile=None, k1=0.0, height=0.0, give_thickness=True):
    rows = []
    for i in range(n):
        outer, holes = shapes(rng)
        part = PhotoParts(outer, holes, height_mm=height)
        cam = camera(rng, size, f_px, k1)
        img = render_photo(MAT, [part], cam, seed=i, blur_px=1.3, noise=0.008, light=(0.2, -0.15), jpeg_quality=92)
        t = truth(outer, holes)
        kw = {"thickness_mm": height, "thickness_u_mm": 0.05} if (height and give_thickness) else {}
        m = measure(img, printed_x_mm=100.0, printed_y_mm=100.0, lens=profile, **kw)
        p = min(m.parts, key=lambda q: math.dist(q.centroid_mm, t["centroid"]))
        e_c = math.dist(p.centroid_mm, t["centroid"])
        rows.append(
            {
                "centroid_mm": e_c,
                "area_rel": abs(p.area_mm2 / t["area"] - 1),
                "ixx_rel": abs(p.ixx_mm4 / t["ixx"] - 1),
                "iyy_rel": abs(p.iyy_mm4 / t["iyy"] - 1),
                "z": [
                    abs(p.area_mm2 - t["area"]) / p.area_u_mm2,
                    abs(p.centroid_mm[0] - t["centroid"][0]) / p.centroid_u_mm[0],
                    abs(p.centroid_mm[1] - t["centroid"][1]) / p.centroid_u_mm[1],
                    abs(p.ixx_mm4 - t["ixx"]) / p.ixx_u_mm4,
                    abs(p.iyy_mm4 - t["iyy"]) / p.iyy_u_mm4,
                ],
                "mm_per_px": m.scale.mm_per_px,
                "rms_px": m.scale.reprojection_rms_px,
            }
        )
    z = np.concatenate([r["z"] for r in rows])
    print(
        f"{condition}: n={n}, {np.median([r['mm_per_px'] for r in rows]):.3f} mm/px, reprojection RMS "
        f"{np.median([r['rms_px'] for r in rows]):.3f} px"
    )
    print(
        f"  median centroid error {np.median([r['centroid_mm'] for r in rows]):.4f} mm (target 0.05), "
        f"median area error {100 * np.median([r['area_rel'] for r in rows]):.4f} % (target 0.1), "
        f"max area error {100 * np.max([r['area_rel'] for r in rows]):.4f} %"
    )
    print(
        f"  median Ixx/Iyy error {100 * np.median([r['ixx_rel'] for r in rows]):.4f} / "
        f"{100 * np.median([r['iyy_rel'] for r in rows]):.4f} % (target 0.3); within 3 sigma: {100 * np.mean(z <= 3):.0f} % "
        f"(target 90), within 2 sigma {100 * np.mean(z <= 2):.0f} %"
    )


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--n", type=int, default=10)
    ap.add_argument("--width", type=int, default=4000)
    ap.add_argument("--height", type=int, default=3000)
    args = ap.parse_args()
    print(f"scanmass {scanmass.__version__} from {scanmass.__file__}")
    size = (args.width, args.height)
    f_px = F_FRAMING_PX * args.width / 4000
    rng = np.random.default_rng(2024)
    t0 = time.time()
    run("pinhole, tilt 0-30", args.n, size, f_px, rng)
    with tempfile.TemporaryDirectory() as tmp:
        paths = []
        for i, (tilt, az) in enumerate([(25, 0), (30, 90), (20, 180), (35, 270), (15, 45), (28, 135)]):
            cam = make_camera(
                size=size,
                f_px=f_px,
                distance_mm=F_FRAMING_PX * 0.1 * 0.95,
                tilt_deg=tilt,
                tilt_dir_deg=az,
                roll_deg=90,
                k1=-0.05,
            )
            path = Path(tmp) / f"v{i}.png"
            Image.fromarray(render_photo(MAT, [], cam, seed=100 + i)).save(path)
            paths.append(path)
        profile = calibrate_lens(paths)
    print(
        f"lens profile: f {profile.camera_matrix[0, 0]:.1f} px (true {f_px:.1f}), k1 {profile.dist_coeffs[0]:+.4f} "
        f"(true -0.05), RMS {profile.rms_px:.3f} px"
    )
    run("k1 = -0.05 with the lens profile", args.n, size, f_px, rng, profile=profile, k1=-0.05)
    run("6 mm thick part with --thickness", args.n, size, f_px, rng, height=6.0)
    run("6 mm thick part without --thickness", max(3, args.n // 3), size, f_px, rng, height=6.0, give_thickness=False)
    print(f"total {time.time() - t0:.0f} s")


if __name__ == "__main__":
    main()
