"""Speed and weight of ``scanmass serve``: upload-to-result time against ``scanmass measure``, page weight.

Run by hand from the repository root:

    python -m benchmarks.bench_serve [--rounds 5] [--photo PATH]

The photo is the demo's phone photo of the chainstay gusset on the A4 mat
(``samples/wrenfield-chainstay-gusset-on-mat.jpg``, 2000 x 1500 px; rendered into a
temporary folder when there is no checkout), with the mat's check-bar readings.

Printed:

- ``scanmass measure PHOTO --json OUT`` as a fresh process, as it is typed at a terminal
  (Python start-up and imports included), median of the rounds;
- the same photo through the page's API on a server started here on 127.0.0.1 with one
  worker: the time from the start of the upload to the job's result being available
  (polled every 20 ms), and until its result page has loaded; median of the rounds, the
  rounds interleaved with the command's; and the ratio (target: at most 1.2);
- the weight of the page before images: the HTML of the upload page and of a result
  page, each with the stylesheet and the script it loads (target: under 100 kB).

The machine's load average is printed too: other work on shared cores slows both.
"""

from __future__ import annotations

import argparse
import os
import re
import signal
import socket
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import scanmass

OPTIONS = {"scale": "mat", "printed_x": "100.4", "printed_y": "99.7"}
CLI_OPTIONS = ["--printed-x", "100.4", "--printed-y", "99.7"]


def _photo(path: str | None, work: Path) -> Path:
    if path:
        return Path(path)
    sample = Path(__file__).resolve().parents[1] / "samples" / "wrenfield-chainstay-gusset-on-mat.jpg"
    if sample.is_file():
        return sample
    from scanmass.cli.demo import make_samples

    make_samples(work / "samples")
    return work / "samples" / sample.name


def _env() -> dict[str, str]:
    return dict(os.environ, PYTHONPATH=str(Path(scanmass.__file__).resolve().parents[1]))


def _cli_round(photo: Path, work: Path) -> float:
    t0 = time.perf_counter()
    subprocess.run(
        [sys.executable, "-m", "scanmass", "measure", str(photo), *CLI_OPTIONS, "--json", str(work / "r.json"), "-q"],
        check=True,
        env=_env(),
    )
    return time.perf_counter() - t0


def _serve_round(client, photo_bytes: bytes) -> tuple[float, float]:
    t0 = time.perf_counter()
    r = client.post("/api/jobs", files={"photo": ("photo.jpg", photo_bytes, "image/jpeg")}, data=OPTIONS)
    r.raise_for_status()
    job = r.json()["id"]
    while True:
        doc = client.get(f"/api/jobs/{job}").json()
        if doc["status"] in ("done", "failed"):
            break
        time.sleep(0.02)
    if doc["status"] != "done":
        raise SystemExit(f"the job failed: {doc['error']}")
    t_result = time.perf_counter() - t0
    client.get(f"/jobs/{job}", headers={"Accept": "text/html"}).raise_for_status()
    return t_result, time.perf_counter() - t0


def _weight(client, path: str) -> tuple[int, int]:
    html = client.get(path, headers={"Accept": "text/html"}).content
    assets = re.findall(rb'(?:src|href)="(/static/[^"]+)"', html)
    return len(html), sum(len(client.get(a.decode()).content) for a in assets)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rounds", type=int, default=5)
    ap.add_argument("--photo", default=None, help="photo of a part on the A4 mat (default: the demo's)")
    args = ap.parse_args()
    import httpx

    print(f"scanmass {scanmass.__version__} from {scanmass.__file__}")
    print(f"load average {os.getloadavg()[0]:.2f} on {os.cpu_count()} cores")
    with tempfile.TemporaryDirectory(prefix="bench-serve-") as tmp:
        work = Path(tmp)
        photo = _photo(args.photo, work)
        data = photo.read_bytes()
        print(f"photo {photo.name}: {len(data) / 1e6:.2f} MB")
        with socket.socket() as s:
            s.bind(("127.0.0.1", 0))
            port = s.getsockname()[1]
        server = subprocess.Popen(
            [sys.executable, "-m", "scanmass", "serve", "--port", str(port), "--store", str(work / "store")],
            env=_env(),
            stdout=subprocess.DEVNULL,
            stderr=subprocess.DEVNULL,
        )
        try:
            base = f"http://127.0.0.1:{port}"
            with httpx.Client(base_url=base, timeout=60.0, headers={"Accept": "application/json"}) as client:
                for _ in range(300):
                    try:
                        client.get("/static/serve.css")
                        break
                    except httpx.TransportError:
                        time.sleep(0.1)
                _serve_round(client, data)  # the first job after start (not counted)
                cli, result, page = [], [], []
                for k in range(args.rounds):
                    cli.append(_cli_round(photo, work))
                    a, b = _serve_round(client, data)
                    result.append(a)
                    page.append(b)
                    print(f"  round {k + 1}: measure {cli[-1]:.2f} s, serve {a:.2f} s (page {b:.2f} s)", flush=True)
                first = client.get("/api/jobs").json()["jobs"][0]["id"]
                upload_html, upload_assets = _weight(client, "/")
                result_html, result_assets = _weight(client, f"/jobs/{first}")
        finally:
            server.send_signal(signal.SIGTERM)
            server.wait(timeout=60)
    m_cli, m_res, m_page = (statistics.median(v) for v in (cli, result, page))
    print(f"scanmass measure (fresh process): median {m_cli:.2f} s over {args.rounds} rounds")
    print(f"serve, upload to result: median {m_res:.2f} s; ratio {m_res / m_cli:.2f} (target <= 1.2)")
    print(f"serve, upload to result page loaded: median {m_page:.2f} s; ratio {m_page / m_cli:.2f}")
    print(
        f"page weight before images: upload page {upload_html + upload_assets} B "
        f"(HTML {upload_html} B + CSS/JS {upload_assets} B), result page {result_html + result_assets} B "
        "(target < 100 kB)"
    )


if __name__ == "__main__":
    main()
