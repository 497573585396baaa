"""The bench page's web API through an HTTP test client (Starlette's TestClient, real worker processes).

Covers: upload, poll, result, downloads, history (label and note editable, search, delete),
the batch tools on its store, token rules, loopback rules, limits, the bounded queue, a
crashed worker, recovery after a killed server, and bad input.
"""

from __future__ import annotations

import csv
import io
import json
import math
import re
import sqlite3
import xml.etree.ElementTree as ET

import pytest

pytest.importorskip("starlette", reason="the serve extra is not installed (pip install scanmass[serve])")
pytest.importorskip("httpx", reason="httpx is not installed (the test client needs it)")

from _serve_helpers import (  # noqa: E402
    crash_first_task,
    hang_first_task,
    mat_photo_jpeg,
    plate_truth,
    scan_png,
    serve_client,
    slow_task,
    upload,
    wait_done,
)
from typer.testing import CliRunner  # noqa: E402

from scanmass.cli.app import app as cli  # noqa: E402
from scanmass.errors import OptionError  # noqa: E402
from scanmass.measurement import CSV_COLUMNS, Measurement  # noqa: E402
from scanmass.serve.app import COOKIE, MAT_LAYOUTS, SHEETS  # noqa: E402
from scanmass.serve.config import ServeConfig, new_token  # noqa: E402
from scanmass.serve.store import ServeStore  # noqa: E402

MAT_FIELDS = {"scale": "mat", "printed_x": "100", "printed_y": "100", "thickness": "0"}  # a printed, sheet-thin plate


@pytest.fixture(scope="module")
def photo() -> bytes:
    return mat_photo_jpeg()


@pytest.fixture(scope="module")
def scan() -> bytes:
    return scan_png()


def test_upload_poll_result_and_downloads(tmp_path, photo):
    with serve_client(tmp_path / "store") as tc:
        r = upload(tc, photo, name="plate.jpg", label="plate", **MAT_FIELDS)
        assert r.status_code == 202, r.text
        assert r.headers["location"] == f"/jobs/{r.json()['id']}"
        job = wait_done(tc, r.json()["id"])
        assert job["status"] == "done", job["error"]
        (part,) = job["parts"]
        t = plate_truth()  # shapely and the polygon vertex sums (tests/polygon_truth.py)
        assert abs(part["area_mm2"] - t["area"]) <= 3 * part["area_u_mm2"]
        assert abs(part["centroid_x_mm"] - t["centroid"][0]) <= 3 * part["centroid_x_u_mm"]
        assert abs(part["centroid_y_mm"] - t["centroid"][1]) <= 3 * part["centroid_y_u_mm"]
        # the band is the stated uncertainty, not one that cannot fail: at 0.31 mm per pixel it is dominated by the
        # photo's tone term (half the 0.45 px move of the edges between an sRGB and a linear reading, ~0.56 %)
        assert part["area_u_mm2"] < 8e-3 * t["area"] and max(part["centroid_x_u_mm"], part["centroid_y_u_mm"]) < 0.3
        assert part["hole_count"] == 2

        page = tc.get(f"/jobs/{job['id']}")
        assert page.status_code == 200 and 'class="part-row"' in page.text
        assert tc.get(f"/jobs/{job['id']}/overlay.jpg").content[:3] == b"\xff\xd8\xff"
        assert tc.get(f"/jobs/{job['id']}/thumb.jpg").content[:3] == b"\xff\xd8\xff"

        downloads = {k: tc.get(url) for k, url in job["downloads"].items()}
        assert all(d.status_code == 200 for d in downloads.values())
        for kind, d in downloads.items():
            assert d.headers["content-disposition"] == f'attachment; filename="plate-{job["id"]}.{kind}"'
        m = Measurement.from_json(downloads["json"].text)
        assert m.parts[0].area_mm2 == pytest.approx(part["area_mm2"], rel=1e-12)
        assert m.source.path == f"images/{job['image']['sha256']}.jpg"  # no server folder in the result
        rows = list(csv.DictReader(io.StringIO(downloads["csv"].text)))
        assert list(rows[0]) == list(CSV_COLUMNS) and len(rows) == 1

        import ezdxf

        doc = ezdxf.read(io.StringIO(downloads["dxf"].text))
        assert doc.header["$INSUNITS"] == 4  # millimetres (DXF reference, $INSUNITS)
        circles = [e for e in doc.modelspace() if e.dxftype() == "CIRCLE"]
        assert sorted(round(c.dxf.radius, 1) for c in circles) == [5.0, 8.0]
        svg = ET.fromstring(downloads["svg"].content)
        assert svg.get("width", "").endswith("mm")
        assert downloads["html"].text.lstrip().lower().startswith("<!doctype html>")
        assert "data:image/png;base64," in downloads["html"].text  # the overlay is in the report


def test_the_form_works_without_javascript(tmp_path, scan):
    with serve_client(tmp_path / "s") as tc:
        r = tc.post(
            "/api/jobs",
            files={"photo": ("a.png", scan, "image/png")},
            headers={"Accept": "text/html"},
            follow_redirects=False,
        )
        assert r.status_code == 303 and re.fullmatch(r"/jobs/\d+", r.headers["location"])
        page = tc.get(r.headers["location"])
        assert page.status_code == 200 and 'id="job"' in page.text
        r = tc.post("/api/jobs", files={"photo": ("a.txt", b"hello", "text/plain")}, headers={"Accept": "text/html"})
        assert r.status_code == 415 and "Not measured" in r.text and r.headers["content-type"].startswith("text/html")


def test_history_edit_search_delete_and_batch_tools(tmp_path, scan):
    store = tmp_path / "store"
    with serve_client(store) as tc:
        ids = []
        for label in ("left gusset", "right gusset", "fan plate"):
            r = upload(tc, scan, name="scan.png", media="image/png", label=label)
            assert r.status_code == 202, r.text
            ids.append(r.json()["id"])
        for i in ids:
            assert wait_done(tc, i)["status"] == "done"
        assert len(list((store / "images").iterdir())) == 1  # one photo, stored once under its hash

        r = tc.patch(f"/api/jobs/{ids[2]}", json={"label": "fan plate 2", "note": "burr on the rim"})
        assert r.status_code == 200 and r.json()["label"] == "fan plate 2" and r.json()["note"] == "burr on the rim"
        r = tc.post(f"/jobs/{ids[0]}/edit", data={"label": "left gusset A", "note": "weighed 41 g"})
        assert r.status_code == 200 and "left gusset A" in r.text  # followed the 303 to the job page

        found = tc.get("/api/jobs", params={"q": "gusset"}).json()["jobs"]
        assert sorted(j["id"] for j in found) == sorted(ids[:2])
        page = tc.get("/history", params={"q": "fan"})
        assert "fan plate 2" in page.text and "left gusset" not in page.text
        assert tc.get("/api/jobs", params={"q": "100%_"}).json()["jobs"] == []  # LIKE wildcards are literal

        # the store is a batch database: batch-export and report DIR read it
        runner = CliRunner()
        res = runner.invoke(cli, ["batch-export", str(store), "--csv", "-"])
        assert res.exit_code == 0, res.output
        assert len(list(csv.DictReader(io.StringIO(res.stdout)))) == 3
        res = runner.invoke(cli, ["report", str(store), "--html", str(tmp_path / "summary.html")])
        assert res.exit_code == 0, res.output
        assert "<table" in (tmp_path / "summary.html").read_text()

        r = tc.delete(f"/api/jobs/{ids[1]}", headers={"Accept": "application/json"})
        assert r.status_code == 200
        assert tc.get(f"/api/jobs/{ids[1]}").status_code == 404
        assert not (store / "jobs" / str(ids[1])).exists()
        assert len(list((store / "images").iterdir())) == 1  # still used by the others
        r = tc.post(f"/jobs/{ids[0]}/delete")
        assert r.status_code == 200 and r.url.path == "/history"
        tc.delete(f"/api/jobs/{ids[2]}")
        assert list((store / "images").iterdir()) == []  # the last job took its photo with it
        conn = sqlite3.connect(store / "scanmass-batch.sqlite")
        assert conn.execute("SELECT COUNT(*) FROM files").fetchone()[0] == 0
        assert conn.execute("SELECT COUNT(*) FROM parts").fetchone()[0] == 0


def test_token_rules_beyond_loopback(tmp_path):
    token = new_token()
    assert len(token) >= 43  # 32 random bytes in URL-safe base64: 256 bits >= 128
    with serve_client(tmp_path / "s", lan=True, token=token, client_host="192.168.7.20") as tc:
        for path in ("/", "/history", "/api/jobs", "/static/serve.js", "/jobs/1"):
            r = tc.get(path)
            assert r.status_code == 401 and r.text == "access token required\n", path
        r = tc.get("/", params={"token": token[:-1] + ("A" if token[-1] != "A" else "B")})
        assert r.status_code == 403 and r.text == "forbidden\n"
        assert "set-cookie" not in r.headers
        r = tc.get("/", headers={"Authorization": "Bearer nope"})
        assert r.status_code == 403

        r = tc.get("/", params={"token": token})
        assert r.status_code == 200 and "<form" in r.text
        cookie = r.headers["set-cookie"]
        assert cookie.startswith(f"{COOKIE}={token};")
        assert "HttpOnly" in cookie and "SameSite=Strict" in cookie
        # the cookie alone opens the API and static files from now on
        assert tc.get("/api/jobs").status_code == 200
        assert tc.get("/static/serve.css").status_code == 200
        tc.cookies.clear()
        assert tc.get("/api/jobs").status_code == 401
        assert tc.get("/api/jobs", headers={"Authorization": f"Bearer {token}"}).status_code == 200


def test_lan_token_is_made_and_long_enough():
    cfg = ServeConfig.build(lan=True, port=8350)
    assert cfg.host == "0.0.0.0" and cfg.token and len(cfg.token) >= 43
    with pytest.raises(OptionError, match="128 bits"):
        ServeConfig.build(lan=True, token="short")


def test_loopback_only_without_lan(tmp_path):
    with serve_client(tmp_path / "s", client_host="192.168.7.20") as tc:
        r = tc.get("/")
        assert r.status_code == 403 and r.text == "forbidden\n"
    with serve_client(tmp_path / "s") as tc:
        assert tc.get("/").status_code == 200
        # a name that resolves elsewhere (DNS rebinding) is refused even from loopback
        assert tc.get("/", headers={"Host": "attacker.example:8350"}).status_code == 403
        # a change sent from another origin is refused
        r = tc.post("/api/jobs", headers={"Origin": "http://attacker.example"}, content=b"x")
        assert r.status_code == 403
    with pytest.raises(OptionError, match="add --lan"):
        ServeConfig.build(host="0.0.0.0")
    res = CliRunner().invoke(cli, ["serve", "--host", "192.168.7.20"])
    assert res.exit_code == 1 and "add --lan" in res.output


def test_security_headers_and_escaping(tmp_path, scan):
    with serve_client(tmp_path / "s") as tc:
        evil = '<script>alert("x")</script>'
        r = upload(tc, scan, name="../../../etc/<img src=x onerror=1>.png", media="image/png", label=evil, note=evil)
        assert r.status_code == 202
        job_id = r.json()["id"]
        wait_done(tc, job_id)
        for path in ("/", f"/jobs/{job_id}", "/history"):
            page = tc.get(path)
            assert evil not in page.text and "<img src=x" not in page.text, path
            assert "&lt;script&gt;" in page.text, path
            csp = page.headers["content-security-policy"]
            assert "default-src 'none'" in csp and "script-src 'self'" in csp and "unsafe-inline" not in csp
            assert page.headers["x-content-type-options"] == "nosniff"
            assert not re.search(r"<script>(?!</script>)", page.text)  # no inline script
        assert tc.get("/api/jobs").headers["content-security-policy"]
        # the client's file name never becomes a path: the photo is stored under its hash
        store = tc.config.store_dir
        files = [p.relative_to(store).as_posix() for p in store.rglob("*") if p.is_file()]
        assert all(re.fullmatch(r"images/[0-9a-f]{64}\.png", f) for f in files if f.startswith("images/"))
        assert not any("etc" in f or "<" in f for f in files)
        assert not (tmp_path / "etc").exists()
        doc = tc.get(f"/api/jobs/{job_id}").json()
        assert doc["label"] == evil  # kept as text; escaped where shown


def test_bad_uploads(tmp_path, photo):
    with serve_client(tmp_path / "s", max_upload_mb=0.15, max_pixels=2_000_000) as tc:
        r = upload(tc, b"<html>not a photo</html>", name="photo.jpg")
        assert r.status_code == 415 and "not a JPEG, PNG or TIFF" in r.json()["error"]
        r = upload(tc, b"", name="photo.jpg")
        assert r.status_code == 400 and "empty" in r.json()["error"]
        r = upload(tc, b"\xff\xd8\xff\xe0" + b"\0" * 100, name="photo.jpg")  # a JPEG header and nothing else
        assert r.status_code == 400 and "damaged" in r.json()["error"]
        r = upload(tc, photo, name="big.jpg")  # ~0.2 MB over a 0.15 MB limit
        assert len(photo) > 150_000 and r.status_code == 413 and "0.15 MB" in r.json()["error"]
        # a huge declared size is refused before the body is read
        r = tc.post(
            "/api/jobs",
            content=b"--b\r\n",
            headers={"Content-Type": "multipart/form-data; boundary=b", "Content-Length": str(10**12)},
        )
        assert r.status_code == 413

        # without a Content-Length, the limit is counted as the bytes stream in
        def chunks():
            yield b'--b\r\nContent-Disposition: form-data; name="photo"; filename="p.jpg"\r\n\r\n\xff\xd8\xff'
            for _ in range(100):
                yield b"\0" * 10_000

        r = tc.post("/api/jobs", content=chunks(), headers={"Content-Type": "multipart/form-data; boundary=b"})
        assert r.status_code == 413
        r = tc.post("/api/jobs", content=b"photo=1", headers={"Content-Type": "application/x-www-form-urlencoded"})
        assert r.status_code == 415
        r = upload(tc, _png(2000, 1001), name="wide.png", media="image/png")  # 2.002 Mpx over a 2 Mpx limit
        assert r.status_code == 413 and "2,000,000" in r.json()["error"]
        r = upload(tc, _png(200, 100), name="p.png", media="image/png", scale="mat", printed_x="abc")
        assert r.status_code == 400 and "not a number" in r.json()["error"]
        r = upload(tc, _png(200, 100), name="p.png", media="image/png", material="unobtainium", thickness="2")
        assert r.status_code == 400 and "unobtainium" in r.json()["error"]
        assert list((tc.config.store_dir / "tmp").iterdir()) == []  # nothing refused is kept
        assert list((tc.config.store_dir / "images").iterdir()) == []

        # a truncated photo passes the header check; its job fails with the loader's reason
        r = upload(tc, photo[:100_000], name="cut.jpg")
        assert r.status_code == 202
        job = wait_done(tc, r.json()["id"])
        assert job["status"] == "failed" and job["error"]
        page = tc.get(f"/jobs/{job['id']}")
        assert "Not measured" in page.text


def _png(w: int, h: int) -> bytes:
    from PIL import Image

    buf = io.BytesIO()
    Image.new("L", (w, h), 200).save(buf, format="PNG")
    return buf.getvalue()


def test_queue_is_bounded(tmp_path, scan):
    with serve_client(tmp_path / "s", queue_size=1, task=slow_task) as tc:
        first = upload(tc, scan, name="a.png", media="image/png").json()["id"]
        for _ in range(50):  # wait until the worker has taken the first one
            if tc.get(f"/api/jobs/{first}").json()["status"] == "running":
                break
            import time

            time.sleep(0.05)
        assert upload(tc, scan, name="b.png", media="image/png").status_code == 202
        r = upload(tc, scan, name="c.png", media="image/png")
        assert r.status_code == 429
        assert int(r.headers["retry-after"]) >= 1 and "queue is full" in r.json()["error"]
        assert wait_done(tc, first)["status"] == "done"


def test_a_crashed_worker_fails_its_job_only(tmp_path, scan):
    with serve_client(tmp_path / "s", task=crash_first_task) as tc:
        a = upload(tc, scan, name="a.png", media="image/png").json()["id"]
        b = upload(tc, scan, name="b.png", media="image/png").json()["id"]
        ja, jb = wait_done(tc, a), wait_done(tc, b)
        assert ja["status"] == "failed" and "stopped abruptly" in ja["error"]
        assert jb["status"] == "done"  # a new worker took the next job


def test_a_job_beyond_the_time_limit_fails_and_the_next_runs(tmp_path, scan):
    with serve_client(tmp_path / "s", task=hang_first_task, job_timeout_s=3) as tc:
        a = upload(tc, scan, name="a.png", media="image/png").json()["id"]
        b = upload(tc, scan, name="b.png", media="image/png").json()["id"]
        ja, jb = wait_done(tc, a), wait_done(tc, b)
        assert ja["status"] == "failed" and "job time limit (3 s)" in ja["error"] and "--job-timeout" in ja["error"]
        assert jb["status"] == "done"  # the hung worker was ended and a new one took the next job


def test_job_time_limit_is_checked():
    with pytest.raises(OptionError, match="job time limit"):
        ServeConfig.build(job_timeout_s=0)


def _wait_running(tc, job_id: int) -> None:
    import time

    for _ in range(200):
        if tc.get(f"/api/jobs/{job_id}").json()["status"] == "running":
            return
        time.sleep(0.05)
    raise AssertionError("the job did not start")


def test_shutdown_lets_the_job_in_flight_finish_or_puts_it_back(tmp_path, scan):
    store = tmp_path / "s"
    with serve_client(store, task=slow_task) as tc:  # default grace: 30 s
        a = upload(tc, scan, name="a.png", media="image/png").json()["id"]
        b = upload(tc, scan, name="b.png", media="image/png").json()["id"]
        _wait_running(tc, a)
    conn = sqlite3.connect(store / "scanmass-batch.sqlite")
    rows = dict(conn.execute("SELECT id, status FROM serve_jobs").fetchall())
    assert rows == {a: "done", b: "queued"}  # the one in flight finished; the waiting one waits
    with serve_client(store, task=slow_task, grace_s=0.0) as tc:
        _wait_running(tc, b)
    row = conn.execute("SELECT status, attempts FROM serve_jobs WHERE id=?", (b,)).fetchone()
    assert row == ("queued", 0)  # no time to finish: back in the queue, the attempt not counted
    with serve_client(store) as tc:
        assert wait_done(tc, b)["status"] == "done"
    assert conn.execute("SELECT COUNT(*) FROM files").fetchone()[0] == 2


def test_restart_after_a_kill_runs_each_job_once(tmp_path, scan):
    store_dir = tmp_path / "s"
    with serve_client(store_dir) as tc:
        ids = [upload(tc, scan, name=f"{i}.png", media="image/png").json()["id"] for i in range(2)]
        for i in ids:
            wait_done(tc, i)
    # what a kill -9 leaves: one job taken by a worker (running), one waiting, one that
    # failed to finish twice; and one whose batch row was written just before the kill
    store = ServeStore(store_dir)
    common = dict(
        image=f"images/{next((store_dir / 'images').iterdir()).name}",
        content_sha256="0" * 64,
        size_bytes=1,
        width_px=1,
        height_px=1,
        client_name="",
        options={},
    )
    running = store.add_job(label="running", **common)
    queued = store.add_job(label="queued", **common)
    twice = store.add_job(label="twice", **common)
    assert store.claim_next("w").id == running.id
    store.conn.execute("UPDATE serve_jobs SET status='running', attempts=2 WHERE id=?", (twice.id,))
    store.db.close()  # no end of run, as after kill -9

    with serve_client(store_dir) as tc:
        assert wait_done(tc, running.id)["status"] == "done"
        assert wait_done(tc, queued.id)["status"] == "done"
        failed = tc.get(f"/api/jobs/{twice.id}").json()
        assert failed["status"] == "failed" and "stopped 2 times" in failed["error"]
    conn = sqlite3.connect(store_dir / "scanmass-batch.sqlite")
    paths = [r[0] for r in conn.execute("SELECT path FROM files")]
    assert len(paths) == len(set(paths)) == 5  # every job once in the batch tables
    statuses = dict(conn.execute("SELECT status, COUNT(*) FROM runs GROUP BY status").fetchall())
    assert statuses == {"done": 2, "killed": 1}


def test_lists_match_the_library():
    from scanmass.scale.mat import LAYOUT_NAMES
    from scanmass.scale.sheet import SHEET_SIZES_MM

    assert set(MAT_LAYOUTS) == set(LAYOUT_NAMES)
    assert set(SHEETS) == set(SHEET_SIZES_MM)


def test_page_weight_under_100_kb(tmp_path):
    with serve_client(tmp_path / "s") as tc:
        page = tc.get("/")
        assets = re.findall(r'(?:src|href)="(/static/[^"]+)"', page.text)
        assert sorted(assets) == ["/static/serve.css", "/static/serve.js"]
        total = len(page.content) + sum(len(tc.get(a).content) for a in assets)
        assert total < 100_000, total


def test_banner_prints_address_token_and_a_qr_code_that_decodes():
    import cv2
    import numpy as np
    import segno

    from scanmass.serve.config import page_urls, qr_text
    from scanmass.serve.run import banner

    cfg = ServeConfig.build(lan=True, port=8351)
    text = banner(cfg)
    url = page_urls(cfg)[0]
    assert f"access token: {cfg.token}" in text and url in text
    assert url.endswith(f":8351/?token={cfg.token}")
    assert qr_text(url) in text and "▀" in qr_text(url)
    # the same symbol, drawn as pixels, decodes back to the address (OpenCV's QR decoder)
    buf = io.BytesIO()
    segno.make(url, error="m").save(buf, kind="png", scale=8, border=4)
    img = cv2.imdecode(np.frombuffer(buf.getvalue(), np.uint8), cv2.IMREAD_GRAYSCALE)
    # OpenCV's classic decoder misreads about 2 % of random tokens; its ArUco-based decoder reads those
    decoded = [cv2.QRCodeDetector().detectAndDecode(img)[0], cv2.QRCodeDetectorAruco().detectAndDecode(img)[0]]
    assert url in decoded
    local = banner(ServeConfig.build(port=8352))
    assert "token" not in local and "http://127.0.0.1:8352/" in local


def test_a_busy_store_or_port_is_a_one_line_error(tmp_path):
    import socket

    from scanmass.errors import OutputError
    from scanmass.serve.run import check_free

    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        s.listen()
        port = s.getsockname()[1]
        res = CliRunner().invoke(cli, ["serve", "--port", str(port), "--store", str(tmp_path / "a")])
        assert res.exit_code == 1 and f"port {port}" in res.output and "--port 0" in res.output
    with serve_client(tmp_path / "b"):
        with pytest.raises(OutputError, match="another 'scanmass serve'"):
            check_free(ServeConfig.build(store_dir=tmp_path / "b", port=0))


def test_serve_command_help_and_bad_port():
    runner = CliRunner()
    res = runner.invoke(cli, ["serve", "--help"])
    assert res.exit_code == 0
    for flag in ("--host", "--port", "--lan", "--store", "--workers", "--queue", "--max-upload", "--max-pixels"):
        assert flag in res.output
    res = runner.invoke(cli, ["serve", "--port", "70000"])
    assert res.exit_code == 1 and "65535" in res.output
    res = runner.invoke(cli, ["serve", "--queue", "0"])
    assert res.exit_code == 1 and "--queue 16" in res.output


def test_options_from_the_form_are_the_library_options():
    from scanmass.serve.app import options_from_form

    cfg = ServeConfig()
    opts = options_from_form(
        {"scale": "mat", "printed_x": "100,2", "printed_y": "99.8", "material": "carbon-steel", "thickness": "3"}, cfg
    )
    assert opts == {
        "scale": "mat",
        "max_pixels": cfg.max_pixels,
        "printed_x_mm": 100.2,
        "printed_y_mm": 99.8,
        "material": "carbon-steel",
        "thickness_mm": 3.0,
    }
    assert options_from_form({"scale": "sheet", "sheet": "a3"}, cfg)["sheet"] == "a3"
    assert options_from_form({"scale": "dpi", "dpi": "600"}, cfg)["dpi"] == 600.0
    with pytest.raises(OptionError, match="needs its resolution"):
        options_from_form({"scale": "dpi"}, cfg)
    with pytest.raises(OptionError, match="thickness"):
        options_from_form({"material": "carbon-steel"}, cfg)
    assert math.isfinite(options_from_form({}, cfg)["max_pixels"])
    json.dumps(opts)
