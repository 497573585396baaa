"""What the worker processes run: the same library calls as ``scanmass measure`` and ``scanmass export``.

Each worker process runs in the store folder (paths in results stay relative to it, so
a downloaded result names ``images/<sha256>.jpg``, not the server's folders), with one
OpenCV thread, and exits when the server process is gone.
"""

from __future__ import annotations

import os
import socket
import time
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from scanmass.batch.backends import _worker_init, one_line
from scanmass.batch.store import utc_now
from scanmass.errors import ScanmassError

__all__ = ["OVERLAY_SIDE_PX", "THUMB_SIDE_PX", "export_task", "measure_task", "worker_init", "worker_pid"]

#: Longest side of the overlay picture shown on the page (and put in the report).
OVERLAY_SIDE_PX = 1600
#: Longest side of the history's thumbnails.
THUMB_SIDE_PX = 160


def worker_init(store_dir: str, parent_pid: int) -> None:
    """Process initializer: work in the store folder; one OpenCV thread; exit with the server."""
    os.chdir(store_dir)
    _worker_init(parent_pid)


def worker_pid() -> int:
    """Load the measuring and writing stages now (so the first photo is not slower) and return the pid."""
    import scanmass.outputs.export  # noqa: F401
    import scanmass.outputs.overlay  # noqa: F401
    import scanmass.outputs.report  # noqa: F401
    import scanmass.outputs.writers  # noqa: F401
    import scanmass.pipeline  # noqa: F401
    import scanmass.scale.mat_scale  # noqa: F401

    return os.getpid()


def measure_task(image: str, options: Mapping[str, Any], out_dir: str) -> dict[str, Any]:
    """Measure one stored photo and write its result, CSV, overlay and thumbnail into ``out_dir``.

    Never raises for a bad photo: returns ``status`` ``ok`` or ``failed`` with a one-line
    ``error``, the result document as JSON text, the CSV rows of its parts, and timing.
    """
    from scanmass.options import MeasureOptions

    started = utc_now()
    t0 = time.perf_counter()
    result = rows = None
    warnings: list[str] = []
    try:
        from scanmass.outputs.overlay import render_overlay
        from scanmass.outputs.writers import write_outputs
        from scanmass.pipeline import measure_loaded

        out = Path(out_dir)
        out.mkdir(parents=True, exist_ok=True)
        measurement, loaded = measure_loaded(image, MeasureOptions(**options))
        written = write_outputs(measurement, json_out=out / "result.json", csv_out=out / "parts.csv")
        picture = render_overlay(loaded, measurement, max_side_px=OVERLAY_SIDE_PX)
        _write_file(out / "overlay.jpg", _jpeg(picture, 88))  # a phone on Wi-Fi: a JPEG, not a 1 MB PNG
        small = picture
        while max(small.shape[:2]) > 2 * THUMB_SIDE_PX:  # halve, then let the JPEG writer finish
            small = small[::2, ::2]
        _write_file(out / "thumb.jpg", _jpeg(_fit(small, THUMB_SIDE_PX), 80))
        result, rows, warnings = written.document, measurement.csv_rows(), list(measurement.warnings)
        status, error = "ok", None
    except ScanmassError as exc:
        status, error = "failed", str(exc)
    except MemoryError:
        status, error = "failed", f"{image}: out of memory while measuring; use a smaller photo"
    except Exception as exc:  # a bug: the job fails with the reason, the worker goes on
        status = "failed"
        error = one_line(f"{image}: internal error ({type(exc).__name__}: {exc}); please report it with this photo")
    return {
        "status": status,
        "error": error,
        "result": result,
        "rows": rows,
        "warnings": warnings,
        "started": started,
        "finished": utc_now(),
        "seconds": time.perf_counter() - t0,
        "worker": f"{socket.gethostname()}:{os.getpid()}",
    }


def _write_file(path: Path, data: bytes) -> None:
    from scanmass.outputs.atomic import write_atomic

    write_atomic(path, data)


def _jpeg(picture_bgr: Any, quality: int) -> bytes:
    import cv2

    ok, buf = cv2.imencode(".jpg", picture_bgr, [cv2.IMWRITE_JPEG_QUALITY, quality])
    if not ok:  # pragma: no cover - OpenCV always encodes a uint8 picture
        raise RuntimeError("JPEG encoding failed")
    return buf.tobytes()


def _fit(picture: Any, side_px: int) -> Any:
    import cv2

    h, w = picture.shape[:2]
    zoom = min(1.0, side_px / max(h, w))
    if zoom >= 1.0:
        return picture
    return cv2.resize(picture, (max(1, round(w * zoom)), max(1, round(h * zoom))), interpolation=cv2.INTER_AREA)


def export_task(kind: str, out_dir: str, title: str) -> str:
    """Write one download of a measured job (``dxf``, ``svg`` or ``html``) from its result JSON.

    Returns the path written (relative to the store folder).
    """
    out = Path(out_dir)
    result = out / "result.json"
    if kind == "dxf":
        from scanmass.outputs.export import export_dxf

        return str(export_dxf(result, out / "outline.dxf").path)
    if kind == "svg":
        from scanmass.outputs.export import export_svg

        return str(export_svg(result, out / "outline.svg").path)
    if kind == "html":
        from scanmass.load.decode import load_image
        from scanmass.measurement import read_result
        from scanmass.outputs.overlay import encode_png, render_overlay
        from scanmass.outputs.report import write_report

        m = read_result(result)
        overlays = None
        if m.source.path and os.path.isfile(m.source.path):  # the report embeds a PNG overlay
            picture = render_overlay(load_image(m.source.path), m, max_side_px=OVERLAY_SIDE_PX)
            overlays = {0: encode_png(picture)}
        return str(write_report([m], out / "report.html", overlays=overlays, title=title))
    raise ValueError(f"unknown export {kind!r}")
