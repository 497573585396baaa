"""Accuracy of scanmass against known truth, beside a plain baseline.

Run by hand from the repository root:

    python benchmarks/bench_accuracy.py [--cases 60] [--seed 1]

Each case renders a synthetic scan (scanmass.testing.scans: exact per-pixel coverage of the part
polygons, Gaussian blur, noise, slow illumination gradient, sRGB encoding, optional JPEG)
of one part with known exact properties (the polygon itself is the truth; its moments come
from scanmass.section, which tests/test_section.py checks against shapely, sympy and
handbook closed forms). Families: plates with holes, discs, L-sections, thin rings, parts
under 50 px across; 300 and 600 dpi; dark-on-light and light-on-dark; clean and realistic.

The baseline is what a careful user would do with a general library: Otsu threshold on the
grey image, connected components, and scikit-image regionprops pixel-count area, centroid
and central moments (pixel centres mapped to mm with the same frame as scanmass).

Printed: median and 95th percentile of the relative area error, the centroid error (px and
mm) and the relative second-moment error (max of Ixx, Iyy relative, and Ixy relative to the
polar moment), for both; and, for scanmass, the coverage of the stated image uncertainty
(edge and threshold terms; the synthetic scale is exact, so the DPI term is left out):
the fraction of errors within 3 sigma and the median of |error| / sigma.
Targets (issue 2): p95 area error <= 0.1 %, p95 centroid error <= 0.05 px, median
second-moment error <= 0.05 %, >= 90 % within 3 sigma, median |error|/sigma >= 0.2.
"""

from __future__ import annotations

import argparse
import io
import math
import time
from dataclasses import dataclass

import numpy as np
from PIL import Image
from skimage import filters
from skimage import measure as skmeasure

from scanmass import measure
from scanmass.errors import ScanmassError
from scanmass.section import section_properties
from scanmass.testing.scans import SynthPart, circle, l_section, rectangle, render_scan, rotate


@dataclass
class Case:
    family: str
    dpi: int
    condition: str
    polarity: str
    part: SynthPart
    size_mm: tuple[float, float]


def _make_case(rng: np.random.Generator, k: int) -> Case:
    family = ["plate", "disc", "l-section", "thin-ring", "small"][k % 5]
    condition = "clean" if (k // 5) % 2 == 0 else "realistic"
    polarity = "dark" if rng.random() < 0.6 else "light"
    size = float(rng.uniform(20, 120))
    dpi = 600 if (size < 60 and rng.random() < 0.5) else 300
    margin = 10.0
    if family == "plate":
        w, h = size, size * rng.uniform(0.35, 0.8)
        outer = rectangle(margin, margin, w, h)
        holes = []
        for _ in range(int(rng.integers(0, 4))):
            r = rng.uniform(1.5, min(w, h) * 0.15)
            holes.append(circle(margin + rng.uniform(0.25, 0.75) * w, margin + rng.uniform(0.3, 0.7) * h, r))
        holes = holes[:1] if len(holes) > 1 and _overlap(holes) else holes
        part = SynthPart(outer, holes)
        extent = (w + 2 * margin, h + 2 * margin)
    elif family == "disc":
        r = size / 2
        part = SynthPart(
            circle(margin + r, margin + r, r),
            [circle(margin + r + rng.uniform(-1, 1), margin + r, rng.uniform(2, r / 3))],
        )
        extent = (2 * r + 2 * margin, 2 * r + 2 * margin)
    elif family == "l-section":
        t = rng.uniform(3, 10)
        part = SynthPart(l_section(margin, margin, size, size * 0.7, t))
        extent = (size + 2 * margin, size * 0.7 + 2 * margin)
    elif family == "thin-ring":
        r = size / 2
        width = rng.uniform(0.6, 1.5)
        part = SynthPart(circle(margin + r, margin + r, r), [circle(margin + r, margin + r, r - width)])
        extent = (2 * r + 2 * margin, 2 * r + 2 * margin)
    else:  # under 50 px across
        dpi = 300
        d = rng.uniform(2.0, 4.0)  # 24-47 px at 300 dpi
        margin = 5.0
        part = (
            SynthPart(circle(margin + d / 2, margin + d / 2, d / 2))
            if rng.random() < 0.5
            else SynthPart(rectangle(margin, margin, d, d * 0.7))
        )
        extent = (d + 2 * margin, d + 2 * margin)
    angle = float(rng.uniform(0, 180))
    centre = (extent[0] / 2, extent[1] / 2)
    diag = math.hypot(*extent)
    shift = ((diag - extent[0]) / 2, (diag - extent[1]) / 2)
    part = SynthPart(
        rotate(part.outer_mm, angle, about_mm=centre) + shift,
        [rotate(h, angle, about_mm=centre) + shift for h in part.holes_mm],
    )
    return Case(family, dpi, condition, polarity, part, (diag, diag))


def _overlap(holes) -> bool:
    cs = [(h.mean(axis=0), np.abs(h - h.mean(axis=0)).max()) for h in holes]
    return any(np.linalg.norm(a[0] - b[0]) < a[1] + b[1] + 1 for i, a in enumerate(cs) for b in cs[i + 1 :])


def _render(case: Case, rng: np.random.Generator) -> np.ndarray:
    fg, bg = (0.06, 0.8) if case.polarity == "dark" else (0.65, 0.04)
    if case.condition == "clean":
        opts = dict(blur_px=float(rng.uniform(0.6, 1.0)), noise=0.002, illumination=None)
    else:
        opts = dict(
            blur_px=float(rng.uniform(0.8, 1.8)),
            noise=float(rng.uniform(0.003, 0.008)),
            illumination=(float(rng.uniform(-0.15, 0.15)), float(rng.uniform(-0.15, 0.15))),
        )
    scan = render_scan(
        [case.part],
        dpi=case.dpi,
        size_mm=case.size_mm,
        background=bg,
        foreground=fg,
        seed=int(rng.integers(1 << 30)),
        **opts,
    )
    img = scan.image
    if case.condition == "realistic" and rng.random() < 0.5:  # JPEG round trip
        buf = io.BytesIO()
        Image.fromarray(img).save(buf, format="JPEG", quality=int(rng.integers(85, 96)))
        img = np.asarray(Image.open(io.BytesIO(buf.getvalue())).convert("L"))
    return img


def _baseline(img: np.ndarray, dpi: float):
    s = 25.4 / dpi
    grey = img.astype(float) / 255.0
    t = filters.threshold_otsu(grey)
    border = np.concatenate([grey[0], grey[-1], grey[:, 0], grey[:, -1]])
    fg = grey < t if np.mean(border > t) > 0.5 else grey > t
    regions = [r for r in skmeasure.regionprops(skmeasure.label(fg)) if r.area >= 20]
    if not regions:
        return None
    r = max(regions, key=lambda r: r.area)
    h = img.shape[0]
    row, col = r.centroid
    mu = r.moments_central  # mu[p, q]: p along rows, q along columns
    return {
        "area": r.area * s * s,
        "centroid": ((col + 0.5) * s, (h - row - 0.5) * s),
        "ixx": mu[2, 0] * s**4,
        "iyy": mu[0, 2] * s**4,
        "ixy": -mu[1, 1] * s**4,  # rows run down, y runs up
    }


def _errors(meas, truth, px_mm):
    a = abs(meas["area"] - truth.area_mm2) / truth.area_mm2
    c = math.dist(meas["centroid"], truth.centroid_mm)
    j = truth.ixx_mm4 + truth.iyy_mm4
    m = max(
        abs(meas["ixx"] - truth.ixx_mm4) / truth.ixx_mm4,
        abs(meas["iyy"] - truth.iyy_mm4) / truth.iyy_mm4,
        abs(meas["ixy"] - truth.ixy_mm4) / j,
    )
    return a, c / px_mm, c, m


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", type=int, default=60)
    parser.add_argument("--seed", type=int, default=1)
    args = parser.parse_args()
    rng = np.random.default_rng(args.seed)
    ours, base, ratios, within, fails = [], [], [], [], []
    by_family: dict[str, list] = {}
    t0 = time.perf_counter()
    for k in range(args.cases):
        case = _make_case(rng, k)
        img = _render(case, rng)
        truth = section_properties(case.part.outer_mm, case.part.holes_mm)
        px_mm = 25.4 / case.dpi
        try:
            m = measure(img, dpi=case.dpi, min_area_mm2=0.5)
        except ScanmassError as exc:
            fails.append((case.family, str(exc)))
            continue
        p = min(m.parts, key=lambda p: math.dist(p.centroid_mm, truth.centroid_mm))
        mine = {"area": p.area_mm2, "centroid": p.centroid_mm, "ixx": p.ixx_mm4, "iyy": p.iyy_mm4, "ixy": p.ixy_mm4}
        e = _errors(mine, truth, px_mm)
        ours.append(e)
        by_family.setdefault(f"{case.family}/{case.condition}", []).append(e)
        b = _baseline(img, case.dpi)
        if b is not None:
            base.append(_errors(b, truth, px_mm))
        terms = p.uncertainty_terms
        sig = {
            k2: math.hypot(terms["edge"][k2], terms["threshold"][k2])
            for k2 in ("area_mm2", "centroid_x_mm", "centroid_y_mm", "ixx_mm4", "iyy_mm4")
        }
        errs = {
            "area_mm2": p.area_mm2 - truth.area_mm2,
            "centroid_x_mm": p.centroid_mm[0] - truth.centroid_mm[0],
            "centroid_y_mm": p.centroid_mm[1] - truth.centroid_mm[1],
            "ixx_mm4": p.ixx_mm4 - truth.ixx_mm4,
            "iyy_mm4": p.iyy_mm4 - truth.iyy_mm4,
        }
        for key, err in errs.items():
            ratio = abs(err) / sig[key] if sig[key] > 0 else math.inf
            ratios.append(ratio)
            within.append(ratio <= 3.0)
    elapsed = time.perf_counter() - t0
    ours_a, base_a = np.array(ours), np.array(base)

    def row(name, col, scale, unit):
        o, b = ours_a[:, col] * scale, base_a[:, col] * scale
        om, op = np.median(o), np.percentile(o, 95)
        bm, bp = np.median(b), np.percentile(b, 95)
        print(f"{name:28s} {om:10.4f} {op:10.4f}   {bm:10.4f} {bp:10.4f}   {bp / op if op else math.inf:8.1f}x  {unit}")

    print(f"{len(ours)} parts measured ({len(fails)} failures) in {elapsed:.0f} s")
    print(
        f"{'figure':28s} {'ours med':>10s} {'ours p95':>10s}   {'base med':>10s} {'base p95':>10s}   {'p95 ratio':>9s}"
    )
    row("area error", 0, 100, "%")
    row("centroid error", 1, 1, "px")
    row("centroid error", 2, 1000, "µm")
    row("second-moment error", 3, 100, "%")
    print(
        f"uncertainty coverage: {100 * np.mean(within):.1f} % of errors within 3 sigma; median |error|/sigma = {np.median(ratios):.2f}"
    )
    print("\nper family (ours): median / p95 area error %, p95 centroid px, median moment error %")
    for fam, vals in sorted(by_family.items()):
        v = np.array(vals)
        print(
            f"  {fam:24s} n={len(v):3d}  {100 * np.median(v[:, 0]):.4f} / {100 * np.percentile(v[:, 0], 95):.4f}   "
            f"{np.percentile(v[:, 1], 95):.4f}   {100 * np.median(v[:, 3]):.4f}"
        )
    for fam, msg in fails:
        print(f"  failure ({fam}): {msg}")
    ok = (
        np.percentile(ours_a[:, 0], 95) <= 1e-3
        and np.percentile(ours_a[:, 1], 95) <= 0.05
        and np.median(ours_a[:, 3]) <= 5e-4
        and np.mean(within) >= 0.9
        and np.median(ratios) >= 0.2
    )
    print("\ntargets met" if ok else "\ntargets NOT all met")


if __name__ == "__main__":
    main()
