"""Designer-quality outlines: entities per part, fit deviation and dimension errors.

Run by hand from the repository root:

    python -m benchmarks.bench_drawing [--angles 0 7 23] [--dpi 300 600] [--noise 0.01]

Renders each designed part of :mod:`scanmass.testing.designs` (lines, arcs, circles,
tangent joints, standard holes) at each resolution and rotation with
:func:`scanmass.testing.scans.render_scan`, measures it, fits it with the default
tolerance (:func:`scanmass.outputs.primitives.fit_part`) and prints:

- entities per part against the design (count and kind; target: equal for >= 90 % of parts);
- the largest deviation of the fitted outline from the measured one, and the same away
  from sharp corners (a blurred corner is rounded in the measured outline);
- dimension errors against the design (truth: the designed values, which the rendered
  polygons reproduce to under 0.1 um): hole diameters, arc radii, overall sizes along the
  datum axes and distances between hole centres (sorted); median and worst, and the
  worst in units of the stated uncertainty where one is stated (hole diameters).
"""

from __future__ import annotations

import argparse
import time

import numpy as np

from scanmass import measure
from scanmass.outputs.drawing import _to_datum
from scanmass.outputs.intent import idealise
from scanmass.outputs.primitives import fit_part, ring_points
from scanmass.testing.designs import all_designs
from scanmass.testing.scans import render_scan


def run(dpis: list[float], angles: list[float], noise: float) -> dict[str, float]:
    rows = []
    dim_err: dict[str, list[float]] = {"hole diameter": [], "arc radius": [], "overall size": [], "hole distance": []}
    z_holes = []
    t0 = time.perf_counter()
    for dpi in dpis:
        for ang in angles:
            for k, d in enumerate(all_designs()):
                scan = render_scan(
                    [d.synth(angle_deg=ang, about_mm=(40, 35))], dpi=dpi, size_mm=(90, 80), noise=noise, seed=k
                )
                m = measure(scan.image, dpi=dpi)
                part = m.parts[0]
                fp = fit_part(part, m.scale.mm_per_px)
                ok = fp.counts() == d.counts()
                corner_free = max(r.max_deviation_outside_corners_mm for r in fp.rings)
                rows.append((dpi, ang, d.name, ok, fp.counts(), d.counts(), fp.max_deviation_mm, corner_free))
                if not ok:
                    continue
                # dimensions of the fit without idealisation, in the datum frame
                ideal = idealise(fp, part, parallel=False, tangent=False, concentric=False)
                outer, holes = _to_datum(ideal)
                fit_d = sorted(2 * float(h.radius_mm or 0) for h in holes)
                true_d = sorted(h[2] for h in d.holes)
                dim_err["hole diameter"] += [a - b for a, b in zip(fit_d, true_d)]
                for h in part.holes:
                    j = int(np.argmin([abs(h.diameter_mm - t) for t in true_d]))
                    z_holes.append(abs(h.diameter_mm - true_d[j]) / h.diameter_u_mm)
                fit_r = sorted(float(e.radius_mm or 0) for e in outer if e.kind == "arc")
                true_r = sorted(float(e.radius_mm or 0) for e in d.outer if e.kind == "arc")
                dim_err["arc radius"] += [a - b for a, b in zip(fit_r, true_r)]
                size_fit = np.ptp(ring_points(outer, 0.01), axis=0)
                size_true = np.ptp(ring_points(d.outer, 0.01), axis=0)
                dim_err["overall size"] += list(np.sort(size_fit) - np.sort(size_true))
                if len(d.holes) > 1:
                    fc = np.array([h.centre_mm for h in holes])
                    tc = np.array([h[:2] for h in d.holes])
                    tdist = np.sort([np.hypot(*(tc[i] - tc[j])) for i in range(len(tc)) for j in range(i + 1, len(tc))])
                    fd_all = np.sort(
                        [np.hypot(*(fc[i] - fc[j])) for i in range(len(fc)) for j in range(i + 1, len(fc))]
                    )
                    dim_err["hole distance"] += list(fd_all - tdist)
    elapsed = time.perf_counter() - t0
    print(
        f"{'dpi':>5} {'angle':>6} {'part':<14} {'equal':<6} {'max dev mm':>11} {'off corners':>12}  fitted / designed"
    )
    for dpi, ang, name, ok, got, want, dev, free in rows:
        print(f"{dpi:5.0f} {ang:6.1f} {name:<14} {str(ok):<6} {dev:11.4f} {free:12.4f}  {got} / {want}")
    equal = sum(r[3] for r in rows) / len(rows)
    print(f"\nparts with the designed entities: {100 * equal:.1f} % of {len(rows)} (target >= 90 %)")
    print(
        f"largest deviation of the fitted outline from the measured one: {max(r[6] for r in rows):.4f} mm "
        f"(median {np.median([r[6] for r in rows]):.4f}); away from sharp corners {max(r[7] for r in rows):.4f} mm"
    )
    out = {"equal_fraction": equal}
    for name, errs in dim_err.items():
        a = np.abs(np.asarray(errs))
        if len(a):
            print(
                f"{name:<14} errors: n {len(a):3d}, median {np.median(a) * 1000:7.2f} um, worst {a.max() * 1000:7.2f} um"
            )
            out[name] = float(a.max())
    if z_holes:
        print(f"hole diameter |error| / stated u: median {np.median(z_holes):.2f}, worst {max(z_holes):.2f}")
    print(f"time {elapsed:.1f} s for {len(rows)} parts")
    return out


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    ap.add_argument("--dpi", type=float, nargs="+", default=[300.0, 600.0])
    ap.add_argument("--angles", type=float, nargs="+", default=[0.0, 7.0, 23.0])
    ap.add_argument("--noise", type=float, default=0.0, help="edge noise (linear light sigma)")
    args = ap.parse_args()
    run(args.dpi, args.angles, args.noise)


if __name__ == "__main__":
    main()
