"""Speed of ``scanmass batch``: scaling over processes, the Dask path, resuming, memory.

Run by hand from the repository root:

    python -m benchmarks.bench_batch [--files 200] [--format png] [--cache DIR]

The scans are rendered once by scanmass.testing.scans into a cache folder (default
``benchmarks/.cache/batch-a4-300dpi-<format>``) and reused: A4 portrait (210 x 297 mm) at
300 dpi (2480 x 3508 px), sRGB, with blur, noise and a slow light gradient, each with three
to five parts of an invented scenario (plates with holes, discs, angles) at positions
that differ from file to file.

Printed, each run into a fresh output folder:

- throughput (files/s, wall time including worker start-up) with 1 and 2 worker
  processes, and their ratio (target: >= 1.8 on 2 cores);
- the same folder through a Dask LocalCluster of 2 single-threaded worker processes on
  loopback (``cluster="local:2"``), and its overhead against the 2-process pool
  (target: <= 15 %); then through the ``tcp://`` address of a LocalCluster started here
  with dask's default worker environment, whose MALLOC_TRIM_THRESHOLD_ costs CPU per
  file (what a remote cluster with default settings would see);
- the time to resume the fully done folder, in the library and through the CLI
  (target: < 2 s for 200 files, nothing re-measured);
- the peak resident memory (ru_maxrss) of each worker.

The machine's load average is printed too: other work on shared cores lowers the scaling.
"""

from __future__ import annotations

import argparse
import os
import shutil
import subprocess
import sys
import tempfile
import time
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np

import scanmass
from scanmass import run_batch
from scanmass.testing.scans import SynthPart, circle, l_section, rectangle, render_scan, save_scan

A4_MM = (210.0, 297.0)
DPI = 300
CACHE_VERSION = 1  # bump when the scene generator changes


def _scene(k: int) -> list[SynthPart]:
    """Three to five parts on a 3 x 4 grid of 70 x 74 mm cells, different for every k."""
    rng = np.random.default_rng(1000 + k)
    cells = rng.permutation(12)[: 3 + k % 3]
    parts = []
    for j, cell in enumerate(cells):
        x0, y0 = 70.0 * (cell % 3), 74.0 * (cell // 3)
        cx, cy = x0 + 35.0 + rng.uniform(-4, 4), y0 + 37.0 + rng.uniform(-4, 4)
        kind = (k + j) % 3
        if kind == 0:
            w, h = rng.uniform(30, 48), rng.uniform(20, 40)
            parts.append(
                SynthPart(
                    rectangle(cx - w / 2, cy - h / 2, w, h, angle_deg=float(rng.uniform(0, 90))),
                    [circle(cx - w / 5, cy, 3.0), circle(cx + w / 5, cy, 4.0)],
                )
            )
        elif kind == 1:
            parts.append(SynthPart(circle(cx, cy, float(rng.uniform(10, 24)))))
        else:
            parts.append(SynthPart(l_section(cx - 20, cy - 20, 40.0, 40.0, float(rng.uniform(6, 12)))))
    return parts


def _render_one(args: tuple[int, str]) -> str:
    k, path = args
    scan = render_scan(_scene(k), dpi=DPI, size_mm=A4_MM, blur_px=1.0, noise=0.006, illumination=(0.05, -0.04), seed=k)
    save_scan(scan, path)
    return path


def ensure_scans(cache: Path, n: int, fmt: str) -> Path:
    """Render the missing scans of the first n into the cache (in parallel); return the folder."""
    folder = cache / f"v{CACHE_VERSION}"
    folder.mkdir(parents=True, exist_ok=True)
    todo = [(k, str(folder / f"scan-{k:04d}.{fmt}")) for k in range(n) if not (folder / f"scan-{k:04d}.{fmt}").exists()]
    if todo:
        t0 = time.perf_counter()
        print(f"rendering {len(todo)} A4 scans at {DPI} dpi into {folder} ...", flush=True)
        with ProcessPoolExecutor(max_workers=os.cpu_count() or 1) as pool:
            for _ in pool.map(_render_one, todo):
                pass
        print(f"  rendered in {time.perf_counter() - t0:.0f} s", flush=True)
    return folder


def _subset(folder: Path, n: int, fmt: str, where: Path) -> Path:
    """A folder of links to the first n scans (the cache may hold more)."""
    where.mkdir(parents=True, exist_ok=True)
    for k in range(n):
        src = folder / f"scan-{k:04d}.{fmt}"
        dst = where / src.name
        if not dst.exists():
            os.symlink(src, dst)
    return where


def _timed(label: str, folder: Path, out: Path, **kw):
    shutil.rmtree(out, ignore_errors=True)
    t0 = time.perf_counter()
    summary = run_batch(folder, out, **kw)
    seconds = time.perf_counter() - t0
    rss = sorted(v / 1024 for v in summary.worker_max_rss_kb.values())
    n = summary.measured + summary.failed
    print(
        f"{label:<34} {n:4d} files in {seconds:6.1f} s  {n / seconds:5.2f} files/s  failed {summary.failed}  "
        f"worker CPU {summary.worker_cpu_seconds:6.1f} s ({summary.worker_cpu_seconds / seconds:.2f} cores busy)  "
        f"worker peak RSS {', '.join(f'{r:.0f}' for r in rss)} MiB  [load {os.getloadavg()[0]:.1f}]",
        flush=True,
    )
    return summary, seconds


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--files", type=int, default=200, help="number of scans (default 200)")
    ap.add_argument("--format", choices=["png", "jpg"], default="png", help="file format of the scans")
    ap.add_argument("--cache", type=Path, default=None, help="cache folder of the rendered scans")
    ap.add_argument("--no-dask", action="store_true", help="skip the Dask LocalCluster run")
    args = ap.parse_args()
    print(f"scanmass {scanmass.__version__} from {scanmass.__file__}")

    cache = args.cache or Path(__file__).parent / ".cache" / f"batch-a4-300dpi-{args.format}"
    scans = ensure_scans(cache, args.files, args.format)
    work = Path(tempfile.mkdtemp(prefix="scanmass-bench-batch-"))
    try:
        folder = _subset(scans, args.files, args.format, work / "scans")
        print(
            f"{args.files} A4 scans at {DPI} dpi ({args.format}), {os.cpu_count()} cores, "
            f"load average {', '.join(f'{v:.1f}' for v in os.getloadavg())}",
            flush=True,
        )

        s1, t1 = _timed("process pool, 1 worker", folder, work / "out1", workers=1)
        s2, t2 = _timed("process pool, 2 workers", folder, work / "out2", workers=2)
        print(f"scaling 1 -> 2 workers: {t1 / t2:.2f}x (target >= 1.8x)", flush=True)

        if not args.no_dask:
            try:
                import distributed  # noqa: F401
            except ImportError:
                print("dask.distributed not installed: Dask run skipped")
            else:
                sd, td = _timed("Dask local:2 (incl. cluster start)", folder, work / "outd", cluster="local:2")
                print(
                    f"Dask overhead vs 2-process pool (both incl. start-up): {100 * (td / t2 - 1):+.1f} % "
                    "(target <= 15 %)",
                    flush=True,
                )
                from distributed import LocalCluster

                t0 = time.perf_counter()
                with LocalCluster(
                    n_workers=2, threads_per_worker=1, processes=True, host="127.0.0.1", dashboard_address=None
                ) as running:
                    t_start = time.perf_counter() - t0
                    sr, tr = _timed(
                        "Dask, running cluster (tcp://)", folder, work / "outr", cluster=running.scheduler_address
                    )
                print(
                    f"LocalCluster start {t_start:.1f} s; on a cluster started with dask's default worker "
                    f"environment (MALLOC_TRIM_THRESHOLD_ set): {100 * (tr / t2 - 1):+.1f} % vs the 2-process pool",
                    flush=True,
                )

        t0 = time.perf_counter()
        again = run_batch(folder, work / "out2", workers=2)
        t_resume = time.perf_counter() - t0
        print(
            f"resume a done folder (library): {t_resume:.2f} s, measured {again.measured}, "
            f"unchanged {again.unchanged} (target < 2 s, nothing re-measured)",
            flush=True,
        )
        t0 = time.perf_counter()
        cmd = [
            sys.executable,
            "-m",
            "scanmass",
            "batch",
            str(folder),
            "--out",
            str(work / "out2"),
            "--workers",
            "2",
            "--quiet",
        ]
        done = subprocess.run(cmd, capture_output=True, text=True)
        t_cli = time.perf_counter() - t0
        print(
            f"resume a done folder (CLI, incl. Python start-up): {t_cli:.2f} s, exit {done.returncode}: "
            f"{done.stdout.splitlines()[0] if done.stdout else done.stderr.strip()}",
            flush=True,
        )

        per_file = t1 / max(1, s1.measured + s1.failed)
        print(
            f"one worker: {per_file:.2f} s per file; "
            f"largest worker peak RSS {max(s2.worker_max_rss_kb.values()) / 1024:.0f} MiB",
            flush=True,
        )
    finally:
        shutil.rmtree(work, ignore_errors=True)


if __name__ == "__main__":
    main()
