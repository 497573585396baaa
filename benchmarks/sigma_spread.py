"""How honest the stated uncertainties are: the spread of |error| / stated sigma in a bench_reallight result.

Run by hand from the repository root on the JSON that ``bench_reallight --json F`` wrote:

    python -m benchmarks.sigma_spread F.json [--top 20]

For each mode (thickness given, not given) and each light (window, mixed, spot, soft, scan)
it prints, for the part figures (area, centroid x and y) and the hole diameters apart, the
count, the median, 90th percentile and largest |z| = |error| / sigma, and the shares within
1 and 3 sigma. For a calibrated Gaussian sigma about 68 % of |z| lie within 1 and the median
|z| is 0.67 (a standard normal's quartile, common practice); a median far below it says the
stated sigma is wider than the errors warrant. Then the ``--top`` largest errors of each mode
(area in %, hole diameters in mm) with their |z|, to check one by one that a known failure's
sigma still covers it.
"""

from __future__ import annotations

import argparse
import json

import numpy as np

LIGHTS = ("window", "mixed", "spot", "soft", "scan")


def light_of(image: str) -> str:
    """The light a render's name says it was lit by (``other`` when it names none)."""
    return next((light for light in LIGHTS if light in image), "other")


def z_values(cases: list[dict]) -> dict[tuple[str, str], list[float]]:
    """|z| per (light, kind): kind ``part`` (area, centroid x, y) or ``hole`` (diameter)."""
    out: dict[tuple[str, str], list[float]] = {}
    for case in cases:
        light = light_of(case["image"])
        for row in case["rows"]:
            if not row.get("found"):
                continue
            out.setdefault((light, "part"), []).extend(row["sigmas"][:3])
            holes = [abs(e) / max(u, 1e-12) for e, u in (h for h in row["holes"] if h is not None)]
            out.setdefault((light, "hole"), []).extend(holes)
    return out


def spread_line(label: str, z: list[float]) -> str:
    """One line: count, median, 90th percentile, max |z|, % within 1 and 3 sigma."""
    if not z:
        return f"{label:14s} n=0"
    a = np.asarray(z, float)
    return (
        f"{label:14s} n={a.size:4d}  median {np.median(a):6.3f}  p90 {np.percentile(a, 90):6.3f}  "
        f"max {a.max():6.2f}  <=1: {100 * np.mean(a <= 1):5.1f} %  <=3: {100 * np.mean(a <= 3):5.1f} %"
    )


def largest_errors(cases: list[dict], top: int) -> list[str]:
    """The ``top`` largest area errors (%) and hole diameter errors (mm) with their |z|."""
    area, holes = [], []
    for case in cases:
        for row in case["rows"]:
            if not row.get("found"):
                continue
            name = f"{case['image']} {row['truth']['shape']}"
            area.append((abs(row["area_rel_err"]) * 100, row["sigmas"][0], name))
            for k, h in enumerate(row["holes"]):
                if h is not None:
                    holes.append((abs(h[0]), abs(h[0]) / max(h[1], 1e-12), f"{name} hole {k + 1} +-{h[1]:.3f}"))
    lines = [f"  area {e:7.3f} %  |z| {z:5.2f}  {n}" for e, z, n in sorted(area, reverse=True)[:top]]
    lines += [f"  hole {e:7.3f} mm |z| {z:5.2f}  {n}" for e, z, n in sorted(holes, reverse=True)[:top]]
    return lines


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("result", help="JSON written by bench_reallight --json")
    ap.add_argument("--top", type=int, default=20, help="largest errors to list per mode")
    args = ap.parse_args(argv)
    with open(args.result, encoding="utf-8") as fh:
        doc = json.load(fh)
    for mode in ("thickness_given", "thickness_not_given"):
        if mode not in doc:
            continue
        cases = doc[mode]["cases"]
        z = z_values(cases)
        print(f"[{mode}]")
        for kind in ("part", "hole"):
            every = [v for (_, k), vals in z.items() if k == kind for v in vals]
            print(spread_line(f"{kind} all", every))
            for light in (*LIGHTS, "other"):
                if (light, kind) in z:
                    print(spread_line(f"  {kind} {light}", z[(light, kind)]))
        if args.top:
            print(f" largest errors ({args.top} of each):")
            print("\n".join(largest_errors(cases, args.top)))
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
