"""Hostile batch folders (issue 13): every good file measured, every bad entry listed, no hang.

The folder mixes good scans with a FIFO and a /dev/zero link named like images, a dangling
link, a symbolic link loop, a link back to a parent folder, an unreadable sub-folder and a
file name that is not UTF-8. Truth for the good files: each scan is two dark rectangles of
70 x 50 px and 150 x 100 px at 300 dpi (areas w x h, closed form).
"""

from __future__ import annotations

import csv
import json
import os
import sqlite3
from pathlib import Path

import numpy as np
import pytest
from _deadline import deadline
from cli_helpers import one_line_error
from PIL import Image
from typer.testing import CliRunner

from scanmass.batch import discover
from scanmass.batch.discover import find_images
from scanmass.batch.export import export_batch
from scanmass.batch.runner import run_batch
from scanmass.batch.store import DB_NAME
from scanmass.cli.app import app
from scanmass.errors import OutputError, ResultFormatError

runner = CliRunner()

MM_PER_PX = 25.4 / 300
AREAS_MM2 = sorted([70 * 50 * MM_PER_PX**2, 150 * 100 * MM_PER_PX**2])


@pytest.fixture(autouse=True)
def no_hang():
    """Fail (not hang) when the batch blocks on a FIFO or a device: 120 s at most."""
    with deadline(120, "the batch hung (issue 13)"):
        yield


def scan(path: Path, shift: int = 0) -> Path:
    """Two dark rectangles on white at 300 dpi; ``shift`` moves them (different content)."""
    a = np.full((300, 400), 240, np.uint8)
    a[50 + shift : 100 + shift, 50:120] = 20
    a[150:250, 200 + shift : 350 + shift] = 20
    Image.fromarray(a).save(path, dpi=(300, 300))
    return path


def hostile_folder(root: Path) -> dict[str, Path]:
    """Good scans and bad entries; returns the bad ones by kind."""
    root.mkdir()
    scan(root / "a.png", 0)
    (root / "sub").mkdir()
    scan(root / "sub" / "b.png", 3)
    bad = {
        "fifo": root / "pipe.png",
        "zero": root / "zero.png",
        "dangling": root / "gone.png",
        "loop": root / "loop.png",
        "parent": root / "sub" / "up",
    }
    os.mkfifo(bad["fifo"])
    os.symlink("/dev/zero", bad["zero"])
    os.symlink(root / "nowhere.png", bad["dangling"])
    os.symlink(bad["loop"], bad["loop"])
    os.symlink(root, bad["parent"])  # a folder link back up: a loop
    return bad


def test_batch_over_a_hostile_folder_measures_good_files_and_lists_bad_ones(tmp_path):
    bad = hostile_folder(tmp_path / "scans")
    out = tmp_path / "out"
    summary = run_batch(tmp_path / "scans", out, workers=0)
    assert summary.measured == 2 and summary.failed == len(bad)
    assert not summary.ok
    reasons = dict(summary.failures)
    assert "FIFO" in reasons[str(bad["fifo"])]
    assert "character device" in reasons[str(bad["zero"])]
    assert "dangling link" in reasons[str(bad["dangling"])]
    assert "symbolic link loop" in reasons[str(bad["loop"])]
    assert "loop" in reasons[str(bad["parent"])]
    with open(out / "failures.csv", encoding="utf-8", newline="") as fh:
        listed = {row["file"]: row["error"] for row in csv.DictReader(fh)}
    assert set(listed) == {str(p) for p in bad.values()}
    with open(out / "parts.csv", encoding="utf-8", newline="") as fh:
        rows = list(csv.DictReader(fh))
    for name in ("a.png", "b.png"):
        areas = sorted(float(r["area_mm2"]) for r in rows if r["file"].endswith(name))
        assert areas == pytest.approx(AREAS_MM2, rel=2e-3)  # closed form w x h
    # again: nothing new measured, the bad entries still listed, still a failure
    again = run_batch(tmp_path / "scans", out, workers=0)
    assert again.measured == 0 and again.unchanged == 2 and len(again.failures) == len(bad)


def test_cli_batch_exit_status_says_something_failed(tmp_path):
    hostile_folder(tmp_path / "scans")
    result = runner.invoke(app, ["batch", str(tmp_path / "scans"), "--out", str(tmp_path / "out"), "-j", "0", "-q"])
    assert result.exit_code == 1, result.output
    assert "5 file(s) failed" in result.output and "Traceback" not in result.output


def test_excluded_bad_entries_are_not_listed(tmp_path):
    hostile_folder(tmp_path / "scans")
    problems: list = []
    files = find_images(
        [tmp_path / "scans"], exclude=["pipe.png", "zero.png", "gone.png", "loop.png", "up"], problems=problems
    )
    assert [p.name for _, p in files] == ["a.png", "b.png"]
    assert problems == []


def test_unreadable_sub_folder_is_listed(tmp_path, monkeypatch):
    root = tmp_path / "scans"
    root.mkdir()
    scan(root / "a.png")
    (root / "locked").mkdir()
    scan(root / "locked" / "c.png", 5)
    real = os.scandir

    def scandir(path):  # what chmod 000 does for a user other than root
        if Path(path).name == "locked":
            raise PermissionError(13, "Permission denied")
        return real(path)

    monkeypatch.setattr(discover.os, "scandir", scandir)
    summary = run_batch(root, tmp_path / "out", workers=0)
    assert summary.measured == 1
    assert summary.failures == [(str(root / "locked"), summary.failures[0][1])]
    assert "folder cannot be read (Permission denied)" in summary.failures[0][1]


def test_unreadable_sub_folder_chmod_000(tmp_path):
    if os.geteuid() == 0:
        pytest.skip("root reads any folder; test_unreadable_sub_folder_is_listed simulates it")
    root = tmp_path / "scans"
    root.mkdir()
    scan(root / "a.png")
    locked = root / "locked"
    locked.mkdir()
    locked.chmod(0)
    try:
        summary = run_batch(root, tmp_path / "out", workers=0)
    finally:
        locked.chmod(0o700)
    assert summary.measured == 1 and "cannot be read" in dict(summary.failures)[str(locked)]


def test_non_utf8_name_is_kept_and_the_batch_carries_on(tmp_path):
    root = tmp_path / "scans"
    root.mkdir()
    latin1 = os.fsdecode(os.fsencode(root) + b"/\xdcbersicht.png")  # Latin-1 "Übersicht.png"
    scan(Path(latin1), 4)
    scan(root / "z.png", 0)
    out = tmp_path / "out"
    summary = run_batch(root, out, workers=0)
    assert summary.measured == 2 and summary.ok
    text = (out / "parts.csv").read_bytes().decode("utf-8")  # strict UTF-8
    escaped = str(root) + "/\\xdcbersicht.png"
    assert escaped in text
    export = export_batch(out, format="jsonl", out=tmp_path / "all.jsonl")
    docs = [json.loads(line) for line in export.read_text(encoding="utf-8").splitlines()]
    assert escaped in {d["file"] for d in docs}
    assert any(d["result"]["source"]["path"] == escaped for d in docs)
    again = run_batch(root, out, workers=0)  # resumes: the escaped name is found again
    assert again.measured == 0 and again.unchanged == 2


def test_files_deleted_during_the_batch_are_counted(tmp_path):
    root = tmp_path / "scans"
    root.mkdir()
    for k in range(3):
        scan(root / f"s{k}.png", k)

    def progress(p):
        if p.event == "cycle":
            (root / "s1.png").unlink()

    summary = run_batch(root, tmp_path / "out", workers=0, progress=progress)
    assert summary.measured == 2 and summary.vanished == 1


def test_read_only_out_folder_is_one_line(tmp_path):
    scans = tmp_path / "scans"
    scans.mkdir()
    scan(scans / "a.png")
    out = tmp_path / "out"
    out.mkdir()
    (out / ".scanmass-batch.lock").mkdir()  # the lock cannot be opened, as in a read-only folder
    with pytest.raises(OutputError, match="cannot write in the output folder"):
        run_batch(scans, out, workers=0)
    result = runner.invoke(app, ["batch", str(scans), "--out", str(out), "-j", "0", "-q"])
    one_line_error(result, "cannot write in the output folder")


def test_read_only_out_folder_chmod(tmp_path):
    if os.geteuid() == 0:
        pytest.skip("root writes into read-only folders; test_read_only_out_folder_is_one_line simulates it")
    scans = tmp_path / "scans"
    scans.mkdir()
    scan(scans / "a.png")
    out = tmp_path / "out"
    out.mkdir()
    out.chmod(0o500)
    try:
        with pytest.raises(OutputError, match="cannot write in the output folder"):
            run_batch(scans, out, workers=0)
    finally:
        out.chmod(0o700)


def test_lock_file_is_removed_after_the_batch(tmp_path):
    scans = tmp_path / "scans"
    scans.mkdir()
    scan(scans / "a.png")
    run_batch(scans, tmp_path / "out", workers=0)
    assert not (tmp_path / "out" / ".scanmass-batch.lock").exists()


def test_corrupted_database_page_fails_cleanly(tmp_path):
    scans = tmp_path / "scans"
    scans.mkdir()
    for k in range(4):
        scan(scans / f"s{k}.png", k)
    out = tmp_path / "out"
    run_batch(scans, out, workers=0)
    db = out / DB_NAME
    with sqlite3.connect(db) as conn:
        page = conn.execute("PRAGMA page_size").fetchone()[0]
        assert conn.execute("PRAGMA page_count").fetchone()[0] >= 4
    conn.close()
    data = bytearray(db.read_bytes())
    data[2 * page : 2 * page + 8] = b"\xff" * 8  # the header of page 3: a damaged b-tree page
    db.write_bytes(bytes(data))
    with pytest.raises(ResultFormatError, match="damaged"):
        export_batch(out, out=tmp_path / "x.csv")
    result = runner.invoke(app, ["batch-export", str(out)])
    one_line_error(result, "damaged")
    with pytest.raises(ResultFormatError, match="damaged"):
        run_batch(scans, out, workers=0)
    assert not (out / ".scanmass-batch.lock").exists()


def test_a_problem_that_is_gone_leaves_the_failures(tmp_path, monkeypatch):
    root = tmp_path / "scans"
    root.mkdir()
    scan(root / "a.png")
    os.mkfifo(root / "pipe.png")
    (root / "locked").mkdir()
    real = os.scandir
    monkeypatch.setattr(
        discover.os,
        "scandir",
        lambda p: (
            (_ for _ in ()).throw(PermissionError(13, "Permission denied")) if Path(p).name == "locked" else real(p)
        ),
    )
    out = tmp_path / "out"
    first = run_batch(root, out, workers=0)
    assert {Path(p).name for p, _ in first.failures} == {"pipe.png", "locked"}
    monkeypatch.setattr(discover.os, "scandir", real)  # the folder is readable again
    (root / "pipe.png").unlink()  # the FIFO is removed
    second = run_batch(root, out, workers=0)
    assert second.ok and second.unchanged == 1
    assert (out / "failures.csv").read_text(encoding="utf-8") == "file,error\n"
