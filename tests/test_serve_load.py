"""The bench page under load and after a kill, with a real server process on 127.0.0.1.

Load: 50 uploads from 8 concurrent clients (bounded in count and time); every job ends
once, none is lost, the server's memory stays bounded. Kill: ``kill -9`` of the server in
the middle of a job, then a restart on the same store: the job runs again, the queued ones
run, each job is recorded once, and the workers of the killed server exit by themselves.
"""

from __future__ import annotations

import os
import signal
import sqlite3
import threading
import time
from concurrent.futures import ThreadPoolExecutor

import pytest

pytest.importorskip("starlette", reason="the serve extra is not installed (pip install scanmass[serve])")
httpx = pytest.importorskip("httpx", reason="httpx is not installed")

from _serve_helpers import mat_photo_jpeg, running_server, scan_png  # noqa: E402

pytestmark = pytest.mark.slow

UPLOADS = 50
CLIENTS = 8
#: Whole-test time limit, s (the loop stops by itself long before a CI run's limit).
TIME_LIMIT_S = 240.0


def _rss_mb(pid: int) -> float:
    with open(f"/proc/{pid}/status") as fh:
        for line in fh:
            if line.startswith("VmRSS:"):
                return int(line.split()[1]) / 1024
    raise AssertionError("no VmRSS")


def _pid_alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    try:
        with open(f"/proc/{pid}/stat", "rb") as fh:
            return fh.read().rsplit(b")", 1)[1].split()[0] != b"Z"
    except OSError:
        return False


def _finish(client: httpx.Client, job_id: int, deadline: float) -> dict:
    while time.monotonic() < deadline:
        doc = client.get(f"/api/jobs/{job_id}").json()
        if doc["status"] in ("done", "failed"):
            return doc
        time.sleep(0.2)
    raise AssertionError(f"job {job_id} did not finish in time")


@pytest.mark.skipif(not os.path.exists("/proc/self/status"), reason="reads memory from /proc (Linux)")
def test_fifty_uploads_from_eight_clients(tmp_path):
    images = [scan_png(seed=s) for s in range(CLIENTS)]
    store = tmp_path / "store"
    store.mkdir()
    start = time.monotonic()
    deadline = start + TIME_LIMIT_S
    with running_server(store, "--workers", "2") as (proc, base, _):
        rss_before = _rss_mb(proc.pid)
        counter = iter(range(UPLOADS))
        lock = threading.Lock()
        refused = []

        def client_loop(k: int) -> list[dict]:
            done = []
            with httpx.Client(base_url=base, timeout=30.0, headers={"Accept": "application/json"}) as c:
                while time.monotonic() < deadline:
                    with lock:
                        n = next(counter, None)
                    if n is None:
                        break
                    while True:  # a full queue says when to come back
                        r = c.post(
                            "/api/jobs",
                            files={"photo": (f"scan-{n}.png", images[n % CLIENTS], "image/png")},
                            data={"label": f"load {n}"},
                        )
                        if r.status_code != 429:
                            break
                        refused.append(int(r.headers["retry-after"]))
                        time.sleep(min(0.5, int(r.headers["retry-after"])))
                    assert r.status_code == 202, r.text
                    done.append(_finish(c, r.json()["id"], deadline))
            return done

        with ThreadPoolExecutor(CLIENTS) as pool:
            results = [doc for docs in pool.map(client_loop, range(CLIENTS)) for doc in docs]
        rss_after = _rss_mb(proc.pid)

    elapsed = time.monotonic() - start
    assert elapsed < TIME_LIMIT_S
    assert len(results) == UPLOADS
    assert sorted(d["label"] for d in results) == sorted(f"load {n}" for n in range(UPLOADS))
    assert all(d["status"] == "done" for d in results), [d["error"] for d in results if d["status"] != "done"]
    assert all(r >= 1 for r in refused)
    conn = sqlite3.connect(store / "scanmass-batch.sqlite")
    assert conn.execute("SELECT COUNT(*), COUNT(DISTINCT id) FROM serve_jobs WHERE status='done'").fetchone() == (
        UPLOADS,
        UPLOADS,
    )
    assert conn.execute("SELECT COUNT(*), COUNT(DISTINCT path) FROM files WHERE status='ok'").fetchone() == (
        UPLOADS,
        UPLOADS,
    )
    assert conn.execute("SELECT MAX(attempts) FROM serve_jobs").fetchone()[0] == 1
    assert len(list((store / "images").iterdir())) == CLIENTS  # stored once per content
    assert rss_after - rss_before < 100, (rss_before, rss_after)  # uploads stream to disk, not memory


def test_kill_minus_nine_mid_job_and_restart(tmp_path):
    photo = mat_photo_jpeg()
    store = tmp_path / "store"
    store.mkdir()
    deadline = time.monotonic() + TIME_LIMIT_S
    with running_server(store, "--workers", "1") as (proc, base, _):
        with httpx.Client(base_url=base, timeout=30.0, headers={"Accept": "application/json"}) as c:
            ids = [
                c.post(
                    "/api/jobs",
                    files={"photo": (f"p{i}.jpg", photo, "image/jpeg")},
                    data={"scale": "mat", "label": f"kill {i}"},
                ).json()["id"]
                for i in range(3)
            ]
            while c.get(f"/api/jobs/{ids[0]}").json()["status"] != "running":
                assert time.monotonic() < deadline
                time.sleep(0.02)
        conn = sqlite3.connect(store / "scanmass-batch.sqlite")
        worker = conn.execute("SELECT worker FROM serve_jobs WHERE id=?", (ids[0],)).fetchone()[0]
        worker_pid = int(worker.rsplit(":", 1)[1])
        assert _pid_alive(worker_pid)
        os.kill(proc.pid, signal.SIGKILL)
        proc.wait(timeout=10)
    # the killed server's workers notice and exit by themselves (they watch their parent)
    end = time.monotonic() + 15
    while _pid_alive(worker_pid):
        assert time.monotonic() < end, "a worker of the killed server is still running"
        time.sleep(0.2)
    status = dict(conn.execute("SELECT id, status FROM serve_jobs").fetchall())
    assert status[ids[0]] == "running" and status[ids[2]] == "queued"

    with running_server(store, "--workers", "1") as (proc, base, _):
        with httpx.Client(base_url=base, timeout=30.0) as c:
            docs = [_finish(c, i, deadline) for i in ids]
    assert [d["status"] for d in docs] == ["done", "done", "done"], [d["error"] for d in docs]
    attempts = dict(conn.execute("SELECT id, attempts FROM serve_jobs").fetchall())
    assert attempts[ids[0]] == 2 and attempts[ids[2]] == 1
    paths = [r[0] for r in conn.execute("SELECT path FROM files")]
    assert len(paths) == len(set(paths)) == 3  # each job recorded once
    runs = [r[0] for r in conn.execute("SELECT status FROM runs ORDER BY id")]
    assert runs == ["killed", "done"]
