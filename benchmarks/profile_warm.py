"""Where a warm ``measure()`` spends its time: cProfile with the process's CPU clock.

Run by hand from the repository root (so that the checkout's scanmass is the one measured):

    python -m benchmarks.profile_warm [FILE] [--runs 5] [--top 20] [--save OUT.prof]

FILE defaults to bench_speed's 6000 x 4000 scan (rendered once into benchmarks/.cache/).
One unmeasured ``measure()`` first (imports, caches), then ``--runs`` timed ones (wall and
CPU seconds each: on shared cores the CPU time is the steadier figure, though other load
still slows memory-bound work), then one under cProfile timed by ``time.process_time``.
Printed: the timed runs, the pipeline's stages (cumulative CPU seconds of the functions
that ``measure_image`` calls), and the top functions by cumulative and by own time.
"""

from __future__ import annotations

import argparse
import cProfile
import os
import pstats
import statistics
import time
from pathlib import Path

import scanmass
from benchmarks import bench_speed

#: Functions of the scan path reported as stages (their cumulative CPU time), in data-flow order.
STAGES = (
    "load_image",
    "segment",
    "_scan_faces",
    "touching_lobes",
    "_touch_splits",
    "_edge_limits",
    "measure_part",
    "_tone_terms",
    "lid_gap",
)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("file", nargs="?", type=Path, help="image to measure (default: bench_speed's scan)")
    parser.add_argument("--runs", type=int, default=5, help="timed runs before the profiled one")
    parser.add_argument("--top", type=int, default=20, help="functions listed per ordering")
    parser.add_argument("--save", type=Path, help="write the profile's statistics here (pstats format)")
    args = parser.parse_args()
    path: Path = args.file
    if path is None:
        bench_speed.CACHE.mkdir(exist_ok=True)
        path = bench_speed.CACHE / "speed-6000x4000.jpg"
        if not path.exists():
            bench_speed.make_scan(path)
    print(f"scanmass {scanmass.__version__} from {scanmass.__file__}")
    print(f"{path.name}; load average {os.getloadavg()[0]:.1f}")
    scanmass.measure(path)
    wall, cpu = [], []
    for _ in range(args.runs):
        t0, c0 = time.perf_counter(), time.process_time()
        scanmass.measure(path)
        wall.append(time.perf_counter() - t0)
        cpu.append(time.process_time() - c0)
    if wall:
        print(
            f"warm measure(): median wall {statistics.median(wall):.3f} s, CPU {statistics.median(cpu):.3f} s "
            f"({args.runs} runs; CPU {', '.join(f'{c:.3f}' for c in cpu)})"
        )
    profile = cProfile.Profile(timer=time.process_time)
    profile.enable()
    scanmass.measure(path)
    profile.disable()
    stats = pstats.Stats(profile)
    if args.save is not None:
        stats.dump_stats(args.save)
    by_name: dict[str, float] = {}
    for (_, _, name), row in stats.stats.items():  # type: ignore[attr-defined]
        by_name[name] = max(by_name.get(name, 0.0), float(row[3]))
    print("stages (cumulative CPU s): " + ", ".join(f"{s} {by_name[s]:.3f}" for s in STAGES if s in by_name))
    for order in ("cumulative", "tottime"):
        print(f"\ntop {args.top} by {order}:")
        stats.sort_stats(order).print_stats(args.top)


if __name__ == "__main__":
    main()
