"""Batch measuring of folders: results, failures, resume after kill -9, duplicates, settings, Dask.

Truth: every good scan is rendered by scanmass.testing.scans from exact polygons; the expected area
and centroid come from shapely (reference library), the centroidal second moments from the
Green's-theorem vertex sums over the same polygons (common practice; the same formulas as
tests/test_measure.py). The scans are small (60 x 50 mm at 200 dpi) so the whole file runs
in well under a minute.
"""

from __future__ import annotations

import contextlib
import csv
import json
import math
import os
import shutil
import signal
import sqlite3
import subprocess
import sys
import threading
import time
from collections.abc import Iterator
from pathlib import Path

import pytest
from polygon_truth import truth
from typer.testing import CliRunner

from scanmass import measure
from scanmass.batch.discover import content_hash, find_images
from scanmass.batch.export import export_batch
from scanmass.batch.runner import BatchProgress, run_batch
from scanmass.batch.settings import folder_settings, settings_hash
from scanmass.batch.store import DB_NAME
from scanmass.cli.app import app
from scanmass.errors import OptionError, OutputError
from scanmass.testing.scans import SynthPart, circle, l_section, rectangle, render_scan, save_scan

DPI = 200
SIZE_MM = (60.0, 50.0)

#: Tolerances of batch figures against the exact polygons, on these clean 200-dpi scans
#: (relative for area and second moments; centroid in pixels of 0.127 mm).
AREA_RTOL = 2e-3
MOMENT_RTOL = 5e-3
CENTROID_TOL_PX = 0.1

runner = CliRunner()


# ------------------------------------------------------------------------------------
# scenes and truth
# ------------------------------------------------------------------------------------
def _scene(k: int) -> list[SynthPart]:
    """A plate with a hole and a disc, slightly different for each k (invented layout)."""
    return [
        SynthPart(
            rectangle(7.0 + 0.3 * k, 6.0, 28.0, 19.0, angle_deg=4.0 + 3.0 * k), [circle(20.5 + 0.3 * k, 15.5, 3.5)]
        ),
        SynthPart(circle(46.0, 33.0, 8.0 - 0.2 * k)),
    ]


def _l_scene() -> list[SynthPart]:
    return [SynthPart(l_section(8.0, 7.0, 30.0, 34.0, 7.0))]


def _truth(part: SynthPart) -> dict:
    """Area and centroid from shapely; centroidal moments by Green's vertex sums (common practice)."""
    t = truth(part.outer_mm, list(part.holes_mm))
    return {
        "area": t["area"],
        "cx": t["centroid"][0],
        "cy": t["centroid"][1],
        "ixx": t["ixx"],
        "iyy": t["iyy"],
        "ixy": t["ixy"],
        "holes": len(part.holes_mm),
    }


def _render(parts: list[SynthPart], seed: int):
    return render_scan(parts, dpi=DPI, size_mm=SIZE_MM, blur_px=0.8, noise=0.004, seed=seed)


def _save(parts, path: Path, seed: int, **kw) -> Path:
    path.parent.mkdir(parents=True, exist_ok=True)
    return save_scan(_render(parts, seed), path, **kw)


def _check_row(row: dict, truth: dict) -> None:
    px_mm = 25.4 / DPI
    assert float(row["area_mm2"]) == pytest.approx(truth["area"], rel=AREA_RTOL)
    assert (
        math.dist((float(row["centroid_x_mm"]), float(row["centroid_y_mm"])), (truth["cx"], truth["cy"]))
        < CENTROID_TOL_PX * px_mm
    )
    assert float(row["ixx_mm4"]) == pytest.approx(truth["ixx"], rel=MOMENT_RTOL)
    assert float(row["iyy_mm4"]) == pytest.approx(truth["iyy"], rel=MOMENT_RTOL)
    assert float(row["ixy_mm4"]) == pytest.approx(truth["ixy"], rel=MOMENT_RTOL, abs=MOMENT_RTOL * truth["ixx"])
    assert int(row["hole_count"]) == truth["holes"]
    assert float(row["area_u_mm2"]) > 0


def _match(rows: list[dict], truths: list[dict]) -> list[tuple[dict, dict]]:
    assert len(rows) == len(truths)
    return [
        (
            min(
                rows,
                key=lambda r: math.dist((float(r["centroid_x_mm"]), float(r["centroid_y_mm"])), (t["cx"], t["cy"])),
            ),
            t,
        )
        for t in truths
    ]


def _read_csv(path: Path) -> list[dict]:
    with open(path, newline="", encoding="utf-8") as fh:
        return list(csv.DictReader(fh))


@contextlib.contextmanager
def _db(out: Path) -> Iterator[sqlite3.Connection]:
    conn = sqlite3.connect(out / DB_NAME)
    conn.row_factory = sqlite3.Row
    try:
        yield conn
    finally:
        conn.close()


# ------------------------------------------------------------------------------------
# the mixed folder: good scans with known truth, broken files with known reasons
# ------------------------------------------------------------------------------------
#: Broken files and a phrase of the reason each must be recorded with.
BAD = {
    "broken/truncated.jpg": "truncated",
    "broken/not-an-image.png": "not a JPEG, PNG or TIFF",
    "broken/empty.png": "empty (0 bytes)",
    "broken/blank.png": "no part found",
    "broken/no-dpi.png": "no scale",
}


@pytest.fixture(scope="module")
def mixed(tmp_path_factory) -> tuple[Path, dict[str, list[dict]]]:
    """A folder tree of scans; returns it and the truth of each good file (relative path)."""
    root = tmp_path_factory.mktemp("mixed")
    truth: dict[str, list[dict]] = {}
    for k, name in enumerate(["plate-a.png", "plate-b.tif", "drawer-2/plate-c.png"]):
        parts = _scene(k)
        _save(parts, root / name, seed=k)
        truth[name] = [_truth(p) for p in parts]
    _save(_l_scene(), root / "drawer-2/angle.png", seed=7)
    truth["drawer-2/angle.png"] = [_truth(p) for p in _l_scene()]
    # a folder whose scans carry no DPI, with the resolution in its settings file
    _save(_scene(3), root / "no-dpi-set/plate-d.png", seed=3, dpi="omit")
    (root / "no-dpi-set/scanmass.toml").write_text(f"dpi = {DPI}\n", encoding="utf-8")
    truth["no-dpi-set/plate-d.png"] = [_truth(p) for p in _scene(3)]

    good_jpeg = _save(_scene(4), root / "broken/source.jpg", seed=4)
    data = good_jpeg.read_bytes()
    good_jpeg.unlink()
    (root / "broken/truncated.jpg").write_bytes(data[: len(data) // 2])
    (root / "broken/not-an-image.png").write_text("a note, not a scan\n", encoding="utf-8")
    (root / "broken/empty.png").write_bytes(b"")
    _save([], root / "broken/blank.png", seed=5)
    _save(_scene(5), root / "broken/no-dpi.png", seed=6, dpi="omit")
    (root / "notes.txt").write_text("not picked up: not an image suffix\n", encoding="utf-8")
    return root, truth


@pytest.mark.slow
def test_good_files_measured_bad_files_recorded(mixed, tmp_path):
    root, truth = mixed
    out = tmp_path / "out"
    seen: list[BatchProgress] = []
    summary = run_batch(root, out, workers=2, progress=seen.append)

    assert (summary.found, summary.measured, summary.failed, summary.duplicates) == (10, 5, 5, 0)
    assert not summary.ok and not summary.interrupted
    assert seen[-1].event == "done" and seen[-1].processed == 10

    rows = _read_csv(out / "parts.csv")
    for name, expected in truth.items():
        mine = [r for r in rows if r["file"] == str(root / name)]
        for row, t in _match(mine, expected):
            _check_row(row, t)
    assert len(rows) == sum(len(t) for t in truth.values())
    assert rows[0].keys() >= {
        "file",
        "part",
        "area_mm2",
        "area_u_mm2",
        "centroid_x_mm",
        "centroid_y_mm",
        "ixx_mm4",
        "iyy_mm4",
        "ixy_mm4",
        "hole_count",
        "mass_g",
        "scale_method",
        "warnings",
    }
    assert {r["scale_method"] for r in rows} == {"dpi"}
    assert not (out / ".scanmass-batch.lock").exists()  # no lock file stays behind

    # the batch gives exactly what measure() gives for the same file and options
    direct = measure(root / "plate-a.png")
    batch_rows = sorted((r for r in rows if r["file"] == str(root / "plate-a.png")), key=lambda r: int(r["part"]))
    assert [float(r["area_mm2"]) for r in batch_rows] == [p.area_mm2 for p in direct.parts]

    failures = {Path(r["file"]).relative_to(root).as_posix(): r["error"] for r in _read_csv(out / "failures.csv")}
    assert set(failures) == set(BAD)
    for name, phrase in BAD.items():
        assert phrase in failures[name] and failures[name].startswith(str(root / name))
        assert "\n" not in failures[name]

    with _db(out) as conn:
        assert conn.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
        assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        statuses = dict(conn.execute("SELECT status, count(*) FROM files GROUP BY status").fetchall())
        assert statuses == {"ok": 5, "failed": 5}
        row = conn.execute("SELECT * FROM files WHERE path=?", (str(root / "plate-a.png"),)).fetchone()
        assert row["content_sha256"] == content_hash(root / "plate-a.png")
        assert row["seconds"] > 0 and row["started"] <= row["finished"]
        assert json.loads(row["result"])["schema"].startswith("scanmass.result/")
        assert conn.execute("SELECT status FROM runs").fetchall()[0][0] == "done"


@pytest.mark.slow
def test_cli_exit_status_and_export(mixed, tmp_path):
    root, truth = mixed
    out = tmp_path / "out"
    result = runner.invoke(app, ["batch", str(root), "--out", str(out), "--workers", "2"])
    assert result.exit_code == 1, result.output
    assert "5 measured, 5 failed" in result.output
    assert "5 file(s) failed" in result.output and "failures.csv" in result.output

    good = [str(root / name) for name in truth if "/" not in name]
    result = runner.invoke(app, ["batch", *good, "--out", str(tmp_path / "good"), "--workers", "1"])
    assert result.exit_code == 0, result.output

    # export again from the database: CSV identical to parts.csv, JSONL one line per file
    result = runner.invoke(app, ["batch-export", str(out), "--csv", "-"])
    assert result.exit_code == 0, result.output
    assert result.stdout == (out / "parts.csv").read_text(encoding="utf-8")
    path = export_batch(out, format="jsonl", out=tmp_path / "all.jsonl")
    docs = [json.loads(line) for line in path.read_text(encoding="utf-8").splitlines()]
    assert len(docs) == 10
    assert {d["status"] for d in docs} == {"ok", "failed"}
    assert all((d["result"] is None) == (d["status"] == "failed") for d in docs)

    result = runner.invoke(app, ["batch-export", str(tmp_path / "nowhere")])
    assert result.exit_code == 1 and "no batch database" in result.output
    result = runner.invoke(app, ["batch", str(tmp_path / "missing"), "--out", str(out)])
    assert result.exit_code == 1 and "folder not found" in result.output


def test_cli_help_says_exit_status():
    result = runner.invoke(app, ["batch", "--help"])
    assert result.exit_code == 0
    text = " ".join(result.output.split())
    assert "Exit status: 0" in text and "1 when any failed" in text
    assert runner.invoke(app, ["batch-export", "--help"]).exit_code == 0


# ------------------------------------------------------------------------------------
# resume
# ------------------------------------------------------------------------------------
def _many(folder: Path, n: int) -> dict[str, list[dict]]:
    truth = {}
    for k in range(n):
        parts = _scene(k % 6)
        parts[1] = SynthPart(circle(46.0, 33.0, 5.0 + 0.25 * (k % 24)))  # every file different (its seed too)
        _save(parts, folder / f"s{k:03d}.png", seed=100 + k)
        truth[f"s{k:03d}.png"] = [_truth(p) for p in parts]
    return truth


def _signal_mid_run(folder: Path, out: Path, sig: int, *, after: int = 3) -> tuple[int, subprocess.CompletedProcess]:
    """Run the CLI batch in a subprocess; send ``sig`` once ``after`` files are recorded."""
    cmd = [
        sys.executable,
        "-c",
        "from scanmass.cli.app import app; app()",
        "batch",
        str(folder),
        "--out",
        str(out),
        "--workers",
        "1",
        "--quiet",
    ]
    # after kill -9 the orphaned workers take up to a second to notice: do not wait on their pipes
    pipe = subprocess.PIPE if sig != signal.SIGKILL else subprocess.DEVNULL
    # a shell's background job inherits SIGINT ignored (bash without job control, as a CI runner may start
    # pytest); Ctrl-C at a terminal is delivered, so the batch starts with the default action, as there
    proc = subprocess.Popen(
        cmd, stdout=pipe, stderr=pipe, text=True, preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL)
    )
    done = 0
    try:
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline and proc.poll() is None:
            if (out / DB_NAME).exists():
                try:
                    with contextlib.closing(sqlite3.connect(out / DB_NAME, timeout=1)) as conn:
                        done = conn.execute("SELECT count(*) FROM files").fetchone()[0]
                except sqlite3.Error:
                    done = 0
                if done >= after:
                    break
            time.sleep(0.01)
        os.kill(proc.pid, sig)
    finally:
        stdout, stderr = proc.communicate(timeout=60)
    return done, subprocess.CompletedProcess(cmd, proc.returncode, stdout, stderr)


@pytest.mark.slow
def test_resume_after_kill_9(tmp_path):
    folder, out = tmp_path / "scans", tmp_path / "out"
    n = 16
    truth = _many(folder, n)
    done_at_kill, proc = _signal_mid_run(folder, out, signal.SIGKILL)
    assert proc.returncode == -signal.SIGKILL
    assert 3 <= done_at_kill < n, "the kill came too late to test a resume"

    with _db(out) as conn:
        assert conn.execute("PRAGMA integrity_check").fetchone()[0] == "ok"
        recorded = conn.execute("SELECT count(*) FROM files").fetchone()[0]
        # every committed file has all its parts: nothing half-written
        assert conn.execute("SELECT count(*) FROM parts").fetchone()[0] == 2 * recorded
    assert recorded >= done_at_kill

    summary = run_batch(folder, out, workers=1)
    assert summary.measured == n - recorded and summary.unchanged == recorded and summary.failed == 0
    with _db(out) as conn:
        assert conn.execute("SELECT status FROM runs ORDER BY id").fetchall()[0][0] == "killed"
        assert tuple(conn.execute("SELECT count(*), count(DISTINCT path) FROM files").fetchone()) == (n, n)
    rows = _read_csv(out / "parts.csv")
    assert len(rows) == 2 * n
    assert len({(r["file"], r["part"]) for r in rows}) == 2 * n
    for name, expected in truth.items():
        for row, t in _match([r for r in rows if r["file"] == str(folder / name)], expected):
            _check_row(row, t)

    # unchanged files are skipped; a changed file and a new file are measured
    new_parts = [SynthPart(circle(30.0, 25.0, 12.0))]
    time.sleep(0.01)
    _save(new_parts, folder / "s000.png", seed=1)
    _save(_l_scene(), folder / "new/added.png", seed=2)
    summary = run_batch(folder, out, workers=1)
    assert (summary.measured, summary.unchanged, summary.failed) == (2, n - 1, 0)
    rows = _read_csv(out / "parts.csv")
    assert len(rows) == 2 * (n - 1) + 1 + 1
    (changed,) = [r for r in rows if r["file"] == str(folder / "s000.png")]
    _check_row(changed, _truth(new_parts[0]))
    (added,) = [r for r in rows if r["file"] == str(folder / "new/added.png")]
    _check_row(added, _truth(_l_scene()[0]))

    # a folder already done: nothing measured, no worker started
    summary = run_batch(folder, out, workers=1)
    assert (summary.measured, summary.unchanged) == (0, n + 1)
    assert summary.worker_max_rss_kb == {}


@pytest.mark.slow
def test_ctrl_c_finishes_files_in_flight_and_writes_csvs(tmp_path):
    folder, out = tmp_path / "scans", tmp_path / "out"
    n = 48  # enough that the batch is still running when 3 files are recorded
    _many(folder, n)
    done_at_signal, proc = _signal_mid_run(folder, out, signal.SIGINT)
    assert proc.returncode == 130, proc.stderr
    assert "interrupted; run the same command again to resume" in proc.stderr
    assert "Traceback" not in proc.stderr
    with _db(out) as conn:
        recorded = conn.execute("SELECT count(*) FROM files").fetchone()[0]
        assert conn.execute("SELECT status FROM runs").fetchone()[0] == "interrupted"
    assert done_at_signal <= recorded < n
    # the CSVs were rewritten on the interrupt: every recorded part, nothing else
    assert len(_read_csv(out / "parts.csv")) == 2 * recorded
    assert run_batch(folder, out, workers=0).measured == n - recorded


@pytest.mark.slow
def test_failures_retried_only_when_asked(mixed, tmp_path):
    root, _ = mixed
    out = tmp_path / "out"
    run_batch(root / "broken", out, workers=0)
    again = run_batch(root / "broken", out, workers=0)
    assert (again.measured, again.failed, again.failed_earlier) == (0, 0, 5)
    assert len(again.failures) == 5 and not again.ok
    retried = run_batch(root / "broken", out, workers=0, retry_failed=True)
    assert (retried.failed, retried.failed_earlier) == (5, 0)
    # the missing resolution given now: a new settings hash, so that file is measured
    fixed = run_batch(root / "broken", out, workers=0, dpi=DPI)
    assert fixed.measured == 1 and "no-dpi.png" not in {Path(p).name for p, _ in fixed.failures}


def test_duplicates_measured_once(tmp_path):
    folder, out = tmp_path / "scans", tmp_path / "out"
    _save(_scene(1), folder / "a.png", seed=1)
    shutil.copy(folder / "a.png", folder / "b-copy.png")
    (folder / "sub").mkdir()
    shutil.copy(folder / "a.png", folder / "sub/c-copy.png")
    summary = run_batch(folder, out, workers=1)
    assert (summary.measured, summary.duplicates, summary.failed) == (1, 2, 0) and summary.ok
    dups = _read_csv(out / "duplicates.csv")
    assert sorted(Path(r["file"]).name for r in dups) == ["b-copy.png", "c-copy.png"]
    assert {r["same_as"] for r in dups} == {str(folder / "a.png")}
    assert {r["file"] for r in _read_csv(out / "parts.csv")} == {str(folder / "a.png")}
    with _db(out) as conn:
        doc = json.loads(
            conn.execute("SELECT result FROM files WHERE path=?", (str(folder / "b-copy.png"),)).fetchone()[0]
        )
        assert doc["source"]["path"] == str(folder / "b-copy.png") and len(doc["parts"]) == 2
    # a later copy is a duplicate of the recorded file, without measuring
    shutil.copy(folder / "a.png", folder / "d-copy.png")
    again = run_batch(folder, out, workers=1)
    assert (again.measured, again.duplicates, again.unchanged) == (0, 1, 3)


def test_settings_change_remeasures(tmp_path):
    folder, out = tmp_path / "scans", tmp_path / "out"
    for k in range(3):
        _save(_scene(k), folder / f"p{k}.png", seed=k)
    assert run_batch(folder, out, workers=0).measured == 3
    assert run_batch(folder, out, workers=0, min_area_mm2=2.0).unchanged == 3  # the default, named
    assert run_batch(folder, out, workers=0, min_area_mm2=3.0).measured == 3
    # a settings file naming a default changes nothing; a real change re-measures its folder only
    (folder / "scanmass.toml").write_text("min_area_mm2 = 3.0\nlevel = 0.5\n", encoding="utf-8")
    assert run_batch(folder, out, workers=0).unchanged == 3
    (folder / "scanmass.toml").write_text(
        "min_area_mm2 = 3.0\nmaterial = 'carbon-steel'\nthickness_mm = 2.0\n", encoding="utf-8"
    )
    summary = run_batch(folder, out, workers=0)
    assert summary.measured == 3
    rows = _read_csv(out / "parts.csv")
    # mass = area x thickness x density (common practice); 7850 kg/m3 is the usual handbook
    # density of carbon steel (common practice, from memory)
    for row in rows:
        assert float(row["mass_g"]) == pytest.approx(float(row["area_mm2"]) * 2.0 * 7850e-9 * 1e3, rel=1e-9)


def test_settings_file_validation(tmp_path):
    folder = tmp_path / "scans"
    _save(_scene(0), folder / "p.png", seed=0)
    (folder / "scanmass.toml").write_text("min_area = 3\n", encoding="utf-8")
    with pytest.raises(OptionError, match=r"scanmass.toml: unknown setting 'min_area'; did you mean 'min_area_mm2'"):
        run_batch(folder, tmp_path / "out", workers=0)
    (folder / "scanmass.toml").write_text("dpi = 'high'\n", encoding="utf-8")
    with pytest.raises(OptionError, match=r"setting dpi = 'high' must be a number"):
        folder_settings(folder)
    (folder / "scanmass.toml").write_text("min_area_mm2 = -1\n", encoding="utf-8")
    with pytest.raises(OptionError, match=r"scanmass.toml: minimum area"):
        run_batch(folder, tmp_path / "out", workers=0)
    (folder / "scanmass.toml").write_text("dpi = [300, 300\n", encoding="utf-8")
    with pytest.raises(OptionError, match="not valid TOML"):
        run_batch(folder, tmp_path / "out", workers=0)
    (folder / "scanmass.toml").write_text("dpi = [600, 300]\nmaterials_file = 'mine.toml'\n", encoding="utf-8")
    assert folder_settings(folder) == {"dpi": [600.0, 300.0], "materials_file": str(folder / "mine.toml")}
    with pytest.raises(OptionError, match="unknown measuring option 'min_area'"):
        run_batch(folder, tmp_path / "out", min_area=3)
    with pytest.raises(OptionError, match="workers"):
        run_batch(folder, tmp_path / "out", workers=-1)
    assert settings_hash({"dpi": 600}) != settings_hash({"dpi": 300})


def test_find_images_patterns(tmp_path):
    for name in [
        "a.png",
        "B.PNG",
        "c.jpg",
        "d.tiff",
        "x/e.png",
        "x/y/f.jpeg",
        ".hidden.png",
        ".cache/g.png",
        "notes.txt",
        "x/skip-me.png",
    ]:
        p = tmp_path / name
        p.parent.mkdir(parents=True, exist_ok=True)
        p.write_bytes(b"")
    rel = lambda found: [p.relative_to(tmp_path).as_posix() for _, p in found]  # noqa: E731
    assert rel(find_images([tmp_path])) == [
        "B.PNG",
        "a.png",
        "c.jpg",
        "d.tiff",
        "x/e.png",
        "x/skip-me.png",
        "x/y/f.jpeg",
    ]
    assert rel(find_images([tmp_path], include=["*.png"])) == ["B.PNG", "a.png", "x/e.png", "x/skip-me.png"]
    assert rel(find_images([tmp_path], include=["x/*"], exclude=["skip-*"])) == ["x/e.png", "x/y/f.jpeg"]
    assert rel(find_images([tmp_path / "x", tmp_path], exclude=["*/y/*"]))[:2] == ["x/e.png", "x/skip-me.png"]
    assert rel(find_images([tmp_path / "c.jpg"])) == ["c.jpg"]
    with pytest.raises(OptionError, match="folder not found"):
        find_images([tmp_path / "nope"])


def test_output_folder_is_locked(tmp_path):
    folder = tmp_path / "scans"
    _save(_scene(0), folder / "p.png", seed=0)
    hold = threading.Event()
    release = threading.Event()

    def slow_progress(p: BatchProgress) -> None:
        if p.event == "cycle":
            hold.set()
            release.wait(10)

    thread = threading.Thread(
        target=run_batch, args=(folder, tmp_path / "out"), kwargs={"workers": 0, "progress": slow_progress}
    )
    thread.start()
    try:
        assert hold.wait(10)
        with pytest.raises(OutputError, match="another 'scanmass batch' is writing"):
            run_batch(folder, tmp_path / "out", workers=0)
    finally:
        release.set()
        thread.join(30)


# ------------------------------------------------------------------------------------
# watch mode
# ------------------------------------------------------------------------------------
def test_watch_picks_up_new_and_changed_files(tmp_path):
    folder, out = tmp_path / "drop", tmp_path / "out"
    _save(_scene(0), folder / "first.png", seed=0)
    stop = threading.Event()
    later = [SynthPart(circle(30.0, 25.0, 10.0))]
    events: list[tuple[int, str, str | None]] = []

    def on_progress(p: BatchProgress) -> None:
        if p.event == "file":
            events.append((p.cycle, p.status, Path(p.path).name))
            if Path(p.path).name == "second.png":
                stop.set()
        if p.event == "idle" and p.cycle == 1:  # the scanner drops a file, and a file is rescanned
            _save(_scene(1), folder / "second.png", seed=1)
            _save(later, folder / "first.png", seed=2)

    summary = run_batch(
        folder,
        out,
        workers=0,
        watch=True,
        poll_seconds=0.05,
        settle_seconds=0.0,
        max_cycles=100,
        stop_event=stop,
        progress=on_progress,
    )
    assert summary.interrupted and summary.cycles == 2
    assert (summary.measured, summary.failed) == (3, 0)
    assert events == [(1, "ok", "first.png"), (2, "ok", "first.png"), (2, "ok", "second.png")]
    (row,) = [r for r in _read_csv(out / "parts.csv") if r["file"] == str(folder / "first.png")]
    _check_row(row, _truth(later[0]))

    # max_cycles ends a quiet watch
    quiet = run_batch(folder, out, workers=0, watch=True, poll_seconds=0.0, max_cycles=2)
    assert (quiet.cycles, quiet.measured, quiet.unchanged, quiet.interrupted) == (2, 0, 2, False)


# ------------------------------------------------------------------------------------
# Dask
# ------------------------------------------------------------------------------------
def test_cluster_without_dask_is_one_line_error(tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)  # import fails as if not installed
    result = runner.invoke(app, ["batch", str(tmp_path), "--out", str(tmp_path / "out"), "--cluster", "local:1"])
    assert result.exit_code == 1
    assert "needs dask.distributed" in result.output and "Traceback" not in result.output


@pytest.mark.slow
def test_local_cluster_matches_process_pool(mixed, tmp_path):
    """LocalCluster on loopback (2 single-threaded workers): the same records as the process pool."""
    pytest.importorskip("distributed")
    root, _ = mixed
    pool = run_batch(root, tmp_path / "pool", workers=2)
    dask = run_batch(root, tmp_path / "dask", cluster="local:2")
    assert dask.backend == "dask-local:2"
    assert (dask.measured, dask.failed, dask.duplicates) == (pool.measured, pool.failed, pool.duplicates)
    assert dask.failures == pool.failures

    def records(out: Path):
        with _db(out) as conn:
            files = conn.execute(
                "SELECT path, status, error, content_sha256, settings_sha256 FROM files ORDER BY path"
            ).fetchall()
            parts = conn.execute(
                "SELECT f.path, p.row_json FROM parts p JOIN files f ON f.id = p.file_id ORDER BY f.path, p.part"
            ).fetchall()
        return [tuple(r) for r in files], [(p, json.loads(j)) for p, j in parts]

    assert records(tmp_path / "dask") == records(tmp_path / "pool")
    assert (tmp_path / "dask" / "parts.csv").read_text() == (tmp_path / "pool" / "parts.csv").read_text()


def test_batch_wide_dpi_measures_a_mat_photo_on_its_mat(tmp_path):
    """Issue 12: a batch-wide --dpi never turns a mat photo into a scan.

    The folder holds a phone-like JPEG of a plate on the A4 marker mat (no DPI stored) and
    a scan saved without a DPI; the batch runs with ``dpi = 600``. The photo must be
    measured on its mat (one part, the plate, close to its true area) rather than as a
    600 dpi scan, which would halve or double every length and turn the mat's markers into
    parts; the scan takes the batch's DPI.
    """
    from _serve_helpers import PLATE_HOLES, PLATE_OUTER, mat_photo_jpeg

    root = tmp_path / "in"
    root.mkdir()
    (root / "on-mat.jpg").write_bytes(mat_photo_jpeg())
    scan_parts = [SynthPart(rectangle(8.0, 7.0, 30.0, 20.0, angle_deg=6.0), [circle(23.0, 17.0, 3.0)])]
    scan = render_scan(scan_parts, dpi=600, size_mm=(46.0, 36.0), blur_px=0.8, noise=0.004, seed=12)
    save_scan(scan, root / "scan.png", dpi="omit")
    out = tmp_path / "out"
    summary = run_batch(root, out, workers=1, dpi=600.0)
    assert (summary.measured, summary.failed) == (2, 0)
    rows = _read_csv(out / "parts.csv")
    photo = [r for r in rows if r["file"].endswith("on-mat.jpg")]
    scanned = [r for r in rows if r["file"].endswith("scan.png")]
    assert len(photo) == 1, [(r["area_mm2"], r["scale_method"]) for r in photo]  # no marker fragments
    assert photo[0]["scale_method"] == "mat"
    # truth: shapely's area of the plate polygon (80 x 50 mm less two holes of 8 and 5 mm radius)
    plate = truth(PLATE_OUTER, PLATE_HOLES)
    assert float(photo[0]["area_mm2"]) == pytest.approx(plate["area"], rel=5e-3)
    assert len(scanned) == 1 and scanned[0]["scale_method"] == "dpi"
    want = truth(scan_parts[0].outer_mm, list(scan_parts[0].holes_mm))["area"]  # shapely
    assert float(scanned[0]["area_mm2"]) == pytest.approx(want, rel=AREA_RTOL)
