"""Shared pieces of the bench page's tests: photos with known truth, a test client, tasks for the workers.

The worker tasks here are module-level functions: the server sends them to its worker
processes by name, so they must be importable there (pytest puts tests/ on sys.path, and
worker processes started with 'spawn' inherit it).
"""

from __future__ import annotations

import contextlib
import io
import os
import signal
import time
import warnings
from collections.abc import Iterator
from pathlib import Path
from typing import Any

import numpy as np
from PIL import Image
from polygon_truth import truth

from scanmass.scale.mat import make_mat
from scanmass.serve.config import ServeConfig
from scanmass.serve.tasks import measure_task
from scanmass.testing.photos import look_at, render_mat_photo
from scanmass.testing.scans import SynthPart, circle, rectangle, render_scan

#: A plate (80 x 50 mm, turned 17 degrees, two holes) lying on the A4 mat, in mat mm.
PLATE_OUTER = rectangle(65.0, 110.0, 80.0, 50.0, angle_deg=17.0)
PLATE_HOLES = [circle(95.0, 135.0, 8.0, 256), circle(120.0, 138.0, 5.0, 256)]


def plate_truth() -> dict:
    """Area, centroid and second moments of the plate (shapely and the polygon vertex sums)."""
    return truth(PLATE_OUTER, PLATE_HOLES)


def mat_photo_jpeg(*, size=(1600, 1200), seed: int = 3, quality: int = 92) -> bytes:
    """A phone-like JPEG (no DPI, no EXIF) of the plate on the A4 mat, slightly tilted."""
    cam = look_at(
        (105.0, 148.5), distance_mm=380.0, tilt_deg=12.0, tilt_dir_deg=30.0, roll_deg=90.0, f_px=1250.0, size_px=size
    )
    grey = render_mat_photo(make_mat("a4-portrait"), [(PLATE_OUTER, PLATE_HOLES)], cam, seed=seed)
    buf = io.BytesIO()
    Image.fromarray(grey).save(buf, format="JPEG", quality=quality)
    return buf.getvalue()


def scan_png(*, seed: int = 0, dpi: float = 150.0) -> bytes:
    """A small flatbed scan (PNG with its DPI) of one plate: quick to measure, for load tests."""
    part = SynthPart(rectangle(10.0 + seed % 5, 12.0, 40.0, 25.0, angle_deg=5.0 + seed), [circle(30.0, 24.0, 4.0, 128)])
    synth = render_scan([part], dpi=dpi, size_mm=(70.0, 50.0), noise=0.004, seed=seed)
    buf = io.BytesIO()
    img = np.asarray(synth.image)
    Image.fromarray(img).save(buf, format="PNG", dpi=(dpi, dpi))
    return buf.getvalue()


@contextlib.contextmanager
def serve_client(
    store: Path, *, client_host: str = "127.0.0.1", task: Any = None, grace_s: float | None = None, **config: Any
) -> Iterator[Any]:
    """A TestClient of the app on ``store`` (workers really start), as a loopback client by default."""
    from scanmass.serve.app import create_app

    defaults: dict[str, Any] = {"store_dir": store, "workers": 1}
    cfg = ServeConfig.build(**(defaults | config))
    if grace_s is not None:
        cfg = cfg.updated(shutdown_grace_s=grace_s)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the test client's notice about httpx
        from starlette.testclient import TestClient

        tc = TestClient(create_app(cfg, task=task), base_url="http://127.0.0.1:8350", client=(client_host, 50123))
    with tc:
        tc.config = cfg  # type: ignore[attr-defined]
        yield tc


def upload(tc: Any, data: bytes, *, name: str = "photo.jpg", media: str = "image/jpeg", **fields: str) -> Any:
    return tc.post(
        "/api/jobs", files={"photo": (name, data, media)}, data=fields, headers={"Accept": "application/json"}
    )


def wait_done(tc: Any, job_id: int, *, timeout_s: float = 90.0, headers: dict | None = None) -> dict:
    """Poll the job until it is done or failed (or fail the test after ``timeout_s``)."""
    end = time.monotonic() + timeout_s
    while time.monotonic() < end:
        doc = tc.get(f"/api/jobs/{job_id}", headers=headers or {}).json()
        if doc["status"] in ("done", "failed"):
            return doc
        time.sleep(0.1)
    raise AssertionError(f"job {job_id} did not finish in {timeout_s} s")


# -- tasks for the worker processes -------------------------------------------------------
def crash_first_task(image: str, options: dict, out_dir: str) -> dict:
    """Kill the worker process on job 1 (as the out-of-memory killer would); measure the others."""
    if out_dir.endswith("/1"):
        os.kill(os.getpid(), signal.SIGKILL)
    return measure_task(image, options, out_dir)


def hang_first_task(image: str, options: dict, out_dir: str) -> dict:
    """Hang on job 1 (a measurement that never ends); measure the others."""
    if out_dir.endswith("/1"):
        time.sleep(3600)
    return measure_task(image, options, out_dir)


def slow_task(image: str, options: dict, out_dir: str) -> dict:
    """Sleep before measuring, so that jobs pile up in the queue."""
    time.sleep(1.5)
    return measure_task(image, options, out_dir)


@contextlib.contextmanager
def running_server(store: Path, *args: str, timeout_s: float = 60.0) -> Iterator[tuple[Any, str, str]]:
    """``python -m scanmass serve`` in a child process on 127.0.0.1 and a free port.

    Yields ``(process, base_url, banner)``; the server is stopped with SIGTERM (SIGKILL if
    it hangs) when the block ends.
    """
    import socket
    import subprocess
    import sys
    import urllib.request

    import scanmass

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    env = dict(os.environ, PYTHONPATH=str(Path(scanmass.__file__).resolve().parents[1]), PYTHONUNBUFFERED="1")
    cmd = [sys.executable, "-m", "scanmass", "serve", "--host", "127.0.0.1", "--port", str(port), "--store", str(store)]
    out_path = store.parent / f"serve-{port}.out"
    with open(out_path, "wb") as out:
        proc = subprocess.Popen([*cmd, *args], stdout=out, stderr=subprocess.STDOUT, env=env, cwd=store.parent)
    base = f"http://127.0.0.1:{port}"
    try:
        end = time.monotonic() + timeout_s
        while True:
            if proc.poll() is not None:
                raise AssertionError(f"the server stopped: {out_path.read_text()}")
            try:
                urllib.request.urlopen(base + "/static/serve.css", timeout=2)
                break
            except urllib.error.HTTPError:
                break  # it answers (401 with a token)
            except OSError:
                if time.monotonic() > end:
                    raise AssertionError(f"the server did not start: {out_path.read_text()}") from None
                time.sleep(0.2)
        yield proc, base, out_path.read_text()
    finally:
        if proc.poll() is None:
            proc.send_signal(signal.SIGTERM)
            try:
                proc.wait(timeout=40)
            except subprocess.TimeoutExpired:
                proc.kill()
                proc.wait()
