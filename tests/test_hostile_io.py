"""Hostile paths and files for the readers and writers (issue 13): nothing clobbered, no hang.

Each case is made in a temporary folder: FIFOs with os.mkfifo, device-like paths as symbolic
links to /dev/null, /dev/zero and /dev/full, pipes with os.pipe, names that are not UTF-8
with os.fsencode/bytes paths. A SIGALRM guard turns a hang into a failure. Truth values are
closed forms (rectangle areas w x h) or the bytes the test itself wrote.
"""

from __future__ import annotations

import errno
import io
import json
import os
import stat
import struct
import subprocess
import sys
import threading
import time
import zlib
from pathlib import Path

import numpy as np
import pytest
from _deadline import deadline
from cli_helpers import one_line_error
from PIL import Image, ImageFile
from typer.testing import CliRunner

from scanmass import measure
from scanmass.cli.app import app
from scanmass.errors import ImageError, MaterialError, OptionError, OutputError, ResultFormatError
from scanmass.load import decode
from scanmass.load.decode import load_image
from scanmass.mass.assembly import assemble
from scanmass.mass.materials import load_materials
from scanmass.measurement import read_result
from scanmass.outputs import atomic
from scanmass.outputs.atomic import atomic_path, check_distinct, clean_leftovers, write_atomic, write_many
from scanmass.readfile import display_path, read_regular

runner = CliRunner()

DPI = 300
MM_PER_PX = 25.4 / DPI


@pytest.fixture(autouse=True)
def no_hang():
    """Fail (not hang) when a case blocks: every test here must end within 60 s."""
    with deadline(60, "the call hung (issue 13: FIFOs and devices must never block)"):
        yield


def scan(path: Path, holes: bool = False) -> Path:
    """A 300-dpi scan: two dark rectangles on white (invented layout), exact to the pixel.

    Part areas: 70 x 50 px and 150 x 100 px (closed form w x h), optionally with a 10 x 10 px
    and a 30 x 30 px hole in the large one.
    """
    a = np.full((300, 400), 240, np.uint8)
    a[50:100, 50:120] = 20
    a[150:250, 200:350] = 20
    if holes:
        a[170:180, 220:230] = 240
        a[190:220, 280:310] = 240
    Image.fromarray(a).save(path, dpi=(DPI, DPI))
    return path


def link(tmp_path: Path, name: str, target: str) -> Path:
    p = tmp_path / name
    os.symlink(target, p)
    return p


# ------------------------------------------------------------------------------------------
# writing: devices refused, FIFOs and pipes written straight through, no two outputs in one
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("device", ["/dev/null", "/dev/zero", "/dev/full"])
def test_device_output_refused_and_left_alone(tmp_path, device):
    out = link(tmp_path, "r.json", device)
    with pytest.raises(OutputError, match="character device, not a regular file") as info:
        write_atomic(out, "{}")
    assert "\n" not in str(info.value)
    assert out.is_symlink() and os.readlink(out) == device  # the link is not replaced by a file
    assert stat.S_ISCHR(os.stat(device).st_mode)  # nor the device
    assert not [p for p in tmp_path.iterdir() if p.name != "r.json"]  # no temporary left


def test_proc_link_refused(tmp_path):
    out = link(tmp_path, "status.json", "/proc/self/status")
    with pytest.raises(OutputError, match="/proc or /sys"):
        write_atomic(out, "{}")
    assert out.is_symlink()


def test_fifo_output_written_through_to_its_reader(tmp_path):
    fifo = tmp_path / "out.csv"
    os.mkfifo(fifo)
    got: list[bytes] = []
    reader = threading.Thread(target=lambda: got.append(fifo.read_bytes()))
    reader.start()
    deadline = time.monotonic() + 10
    while True:  # wait until the reader has opened its end
        try:
            write_atomic(fifo, "a,b\n1,2\n")
            break
        except OutputError:
            if time.monotonic() > deadline:
                raise
            time.sleep(0.05)
    reader.join(10)
    assert got == [b"a,b\n1,2\n"]
    assert stat.S_ISFIFO(os.stat(fifo).st_mode)  # still a FIFO, not replaced by a file


def test_fifo_without_reader_is_refused_at_once(tmp_path):
    fifo = tmp_path / "nobody.json"
    os.mkfifo(fifo)
    t0 = time.monotonic()
    with pytest.raises(OutputError, match="no program is reading"):
        write_atomic(fifo, "{}")
    assert time.monotonic() - t0 < 5
    assert stat.S_ISFIFO(os.stat(fifo).st_mode)


def test_pipe_named_by_dev_fd_is_written_through():
    # what a shell's --csv >(...) passes: /dev/fd/N of a pipe
    r, w = os.pipe()
    try:
        write_atomic(f"/dev/fd/{w}", b"x,y\n")
        os.close(w)
        w = -1
        assert os.read(r, 100) == b"x,y\n"
    finally:
        os.close(r)
        if w >= 0:
            os.close(w)


def test_closed_descriptor_is_refused():
    r, w = os.pipe()
    os.close(r)
    os.close(w)
    with pytest.raises(OutputError, match="not open"):
        write_atomic(f"/dev/fd/{w}", "x")


def test_pipe_closed_by_its_reader_is_one_line():
    r, w = os.pipe()
    os.close(r)
    try:
        with pytest.raises(OutputError, match="closed by the program reading it"):
            write_atomic(f"/dev/fd/{w}", "x")
    finally:
        os.close(w)


def test_two_outputs_naming_one_file_refused_before_writing(tmp_path):
    same = tmp_path / "same.out"
    with pytest.raises(OutputError, match="name the same file"):
        write_many([(same, "a"), (tmp_path / "." / "same.out", "b")])
    assert not same.exists()
    same.write_text("old")
    os.link(same, tmp_path / "hard.out")
    with pytest.raises(OutputError, match="name the same file"):
        check_distinct([same, tmp_path / "hard.out"])
    with pytest.raises(OutputError, match="name the same file"):
        check_distinct(["-", "-"])
    assert same.read_text() == "old"


def test_cli_same_output_three_times_refused(tmp_path):
    image = scan(tmp_path / "scan.png")
    same = tmp_path / "same.out"
    result = runner.invoke(
        app,
        ["measure", str(image), "--json", str(same), "--csv", str(same), "--overlay", str(tmp_path / "." / "same.out")],
    )
    one_line_error(result, "name the same file")
    assert not same.exists()


def test_symlink_to_a_regular_file_keeps_the_link(tmp_path):
    real = tmp_path / "real.json"
    real.write_text("old")
    alias = link(tmp_path, "alias.json", str(real))
    write_atomic(alias, "new")
    assert alias.is_symlink() and real.read_text() == "new"


def test_outputs_of_one_run_are_renamed_together(tmp_path, monkeypatch):
    first, second = tmp_path / "r.json", tmp_path / "r.csv"
    first.write_text("old json")
    second.write_text("old csv")
    real_write = atomic._write_bytes

    def failing(tmp, payload, given):
        if given.endswith(".csv"):
            raise OutputError("disk full (simulated)")
        real_write(tmp, payload, given)

    monkeypatch.setattr(atomic, "_write_bytes", failing)
    with pytest.raises(OutputError, match="simulated"):
        write_many([(first, "new json"), (second, "new csv")])
    # neither was replaced: no new JSON beside an old CSV
    assert first.read_text() == "old json" and second.read_text() == "old csv"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.csv", "r.json"]


def dead_pid() -> int:
    proc = subprocess.Popen([sys.executable, "-c", "pass"])
    proc.wait()
    return proc.pid


def test_leftovers_of_a_killed_run_are_cleaned(tmp_path):
    host = atomic._host_tag()
    stale = tmp_path / f".r.json{atomic.TEMP_MARK}{host}-{dead_pid()}-abc123.tmp.json"
    live = tmp_path / f".r.json{atomic.TEMP_MARK}{host}-{os.getpid()}-def456.tmp.json"
    foreign = tmp_path / f".r.json{atomic.TEMP_MARK}00000000-1-ghi789.tmp.json"
    for p in (stale, live, foreign):
        p.write_text("half")
    write_atomic(tmp_path / "r.json", "{}")
    left = sorted(p.name for p in tmp_path.iterdir())
    assert stale.name not in left  # its process is gone
    assert live.name in left  # a live writer's file is kept
    assert foreign.name in left  # another host's: kept until a day old
    os.utime(foreign, (time.time() - 2 * 86400,) * 2)
    assert foreign in clean_leftovers(tmp_path)


def test_kill_9_during_writing_leaves_only_hidden_temporaries_a_later_run_removes(tmp_path):
    # a child that is killed while its temporary files exist, before any rename
    code = (
        "import os, sys, time\n"
        "from scanmass.outputs import atomic\n"
        "def stall(tmp, target):\n"
        "    print('ready', flush=True); time.sleep(60)\n"
        "atomic._rename = stall\n"
        f"atomic.write_many([({str(tmp_path / 'r.json')!r}, 'new'), ({str(tmp_path / 'r.csv')!r}, 'new')])\n"
    )
    env = {**os.environ, "PYTHONPATH": str(Path(atomic.__file__).parents[2])}
    proc = subprocess.Popen([sys.executable, "-c", code], stdout=subprocess.PIPE, env=env)
    assert proc.stdout is not None and proc.stdout.readline().strip() == b"ready"
    proc.kill()
    proc.wait()
    left = [p.name for p in tmp_path.iterdir()]
    assert left and all(name.startswith(".") and atomic.TEMP_MARK in name for name in left)
    write_many([(tmp_path / "r.json", "mine"), (tmp_path / "r.csv", "mine")])
    assert sorted(p.name for p in tmp_path.iterdir()) == ["r.csv", "r.json"]


def test_atomic_path_streams_to_stdout(tmp_path, capsysbinary):
    with atomic_path("-") as tmp:
        tmp.write_bytes(b"\x89PNG fake")
    assert capsysbinary.readouterr().out == b"\x89PNG fake"


def test_no_developer_wording_in_messages():
    source = (Path(atomic.__file__)).read_text(encoding="utf-8")
    assert "before calling write_atomic" not in source


# ------------------------------------------------------------------------------------------
# stdout full or closed (a real process: the CLI's entry point)
# ------------------------------------------------------------------------------------------
def run_cli(args: list[str], **kw) -> subprocess.CompletedProcess:
    env = {**os.environ, "PYTHONPATH": str(Path(atomic.__file__).parents[2])}
    return subprocess.run([sys.executable, "-m", "scanmass", *args], capture_output=False, env=env, **kw)


@pytest.mark.parametrize("args", [[], ["--json", "-"]])
def test_stdout_full_is_one_line(tmp_path, args):
    image = scan(tmp_path / "scan.png")
    with open("/dev/full", "wb") as full:
        proc = run_cli(["measure", str(image), *args], stdout=full, stderr=subprocess.PIPE)
    err = proc.stderr.decode()
    assert proc.returncode == 1, err
    assert "Traceback" not in err and len(err.strip().splitlines()) == 1
    assert "full" in err


def test_stdout_closed_is_one_line(tmp_path):
    image = scan(tmp_path / "scan.png")
    proc = subprocess.run(
        [sys.executable, "-m", "scanmass", "measure", str(image), "--json", "-"],
        stdout=subprocess.DEVNULL,
        stderr=subprocess.PIPE,
        env={**os.environ, "PYTHONPATH": str(Path(atomic.__file__).parents[2])},
        preexec_fn=lambda: os.close(1),
    )
    err = proc.stderr.decode()
    assert proc.returncode == 1 and "Traceback" not in err and "standard output" in err


def test_csv_to_a_shell_pipe(tmp_path):
    # the shell's --csv >(wc -l): a pipe named /dev/fd/N
    image = scan(tmp_path / "scan.png")
    r, w = os.pipe()
    proc = run_cli(["measure", str(image), "-q", "--csv", f"/dev/fd/{w}"], pass_fds=(w,), stderr=subprocess.PIPE)
    os.close(w)
    with os.fdopen(r, "rb") as fh:
        lines = fh.read().decode().splitlines()
    assert proc.returncode == 0, proc.stderr
    assert lines[0].startswith("file,part,") and len(lines) == 3  # header + two parts


# ------------------------------------------------------------------------------------------
# reading: regular files only, never more than their size
# ------------------------------------------------------------------------------------------
def test_fifo_named_like_an_image_is_refused_without_waiting(tmp_path):
    fifo = tmp_path / "scan.png"
    os.mkfifo(fifo)
    t0 = time.monotonic()
    with pytest.raises(ImageError, match="FIFO") as info:
        load_image(fifo)
    assert time.monotonic() - t0 < 5 and "\n" not in str(info.value)


@pytest.mark.parametrize(
    "reader, name, error",
    [
        (load_image, "scan.png", ImageError),
        (read_result, "result.json", ResultFormatError),
        (lambda p: load_materials(p), "materials.toml", MaterialError),
        (assemble, "asm.toml", OptionError),
    ],
)
@pytest.mark.parametrize("device", ["/dev/zero", "/dev/null"])
def test_device_links_are_refused_by_every_reader(tmp_path, reader, name, error, device):
    path = link(tmp_path, name, device)
    with pytest.raises(error, match="character device, not a regular file"):
        reader(path)


@pytest.mark.parametrize(
    "args",
    [
        ["assemble", "{p}"],
        ["balance", "{p}", "--material", "steel", "--thickness", "2"],
        ["materials", "--materials", "{p}"],
        ["measure", "{p}"],
        ["report", "{p}", "--html", "{d}/r.html"],
        ["export", "{p}", "--svg", "{d}/r.svg"],
    ],
)
def test_cli_on_dev_zero_is_one_line(tmp_path, args):
    path = link(tmp_path, "zero.json" if args[0] in ("balance", "report", "export") else "zero.toml", "/dev/zero")
    if args[0] == "measure":
        path = link(tmp_path, "zero.png", "/dev/zero")
    result = runner.invoke(app, [a.format(p=path, d=tmp_path) for a in args])
    one_line_error(result, "character device")


def test_reads_stop_at_the_file_size(tmp_path):
    path = tmp_path / "a.bin"
    path.write_bytes(b"12345")
    assert read_regular(path, error=ImageError) == b"12345"
    with pytest.raises(ImageError, match="more than the 4 bytes"):
        read_regular(path, error=ImageError, max_bytes=4)


def test_dangling_link_and_loop_have_their_own_messages(tmp_path):
    with pytest.raises(ImageError, match="dangling link"):
        load_image(link(tmp_path, "gone.png", str(tmp_path / "nowhere.png")))
    loop = tmp_path / "loop.png"
    os.symlink(loop, loop)
    with pytest.raises(ImageError, match="symbolic link loop"):
        load_image(loop)


# ------------------------------------------------------------------------------------------
# memory: a budget in bytes, one decode
# ------------------------------------------------------------------------------------------
def png16_rgba(path: Path, height: int, width: int) -> Path:
    import cv2

    a = np.full((height, width, 4), 60000, np.uint16)
    a[..., 3] = 65535
    a[height // 4 : height // 2, width // 4 : width // 2, :3] = 2000
    assert cv2.imwrite(str(path), a)
    return path


def test_memory_budget_counts_bytes_not_only_pixels(tmp_path):
    path = png16_rgba(tmp_path / "deep.png", 100, 100)
    # 10 000 px pass a pixel limit of 10 000, but 100 x 100 x 4 channels x 2 bytes x 2 copies
    # = 160 000 bytes exceed the budget of 4 bytes x 10 000 px
    with pytest.raises(ImageError, match=r"4 channel\(s\) x 2 byte\(s\) x 2 copies needs") as info:
        load_image(path, max_pixels=10_000)
    assert "--max-pixels N (N >= 40000)" in str(info.value)
    assert load_image(path, max_pixels=40_000).grey.dtype == np.uint16
    grey = tmp_path / "grey.png"
    Image.fromarray(np.full((100, 100), 128, np.uint8)).save(grey)
    assert load_image(grey, max_pixels=10_000).grey.shape == (100, 100)  # 1 byte per pixel: within


def test_deep_colour_is_decoded_once(tmp_path, monkeypatch):
    path = png16_rgba(tmp_path / "deep.png", 64, 80)
    calls = []
    real = decode._decode
    monkeypatch.setattr(decode, "_decode", lambda im, name: calls.append(name) or real(im, name))
    img = load_image(path)
    assert calls == [] and img.grey.dtype == np.uint16 and img.grey.shape == (64, 80)
    # 60000 and 2000 encoded in every channel stay 60000 and 2000 (BT.601 luma weights sum to 1)
    assert img.grey[0, 0] == 60000 and img.grey[20, 25] == 2000


# ------------------------------------------------------------------------------------------
# damaged files refused as damaged
# ------------------------------------------------------------------------------------------
def corrupt_idat(data: bytes) -> bytes:
    """Flip 8 bytes in the middle of the first IDAT chunk and fix its CRC (a valid chunk, bad deflate data)."""
    d = bytearray(data)
    i = d.index(b"IDAT")
    (n,) = struct.unpack(">I", d[i - 4 : i])
    mid = i + 4 + n // 2
    for k in range(8):
        d[mid + k] ^= 0x5A
    d[i + 4 + n : i + 8 + n] = struct.pack(">I", zlib.crc32(bytes(d[i : i + 4 + n])) & 0xFFFFFFFF)
    return bytes(d)


def test_png_with_corrupt_deflate_stream_is_damaged(tmp_path):
    good = scan(tmp_path / "good.png")
    bad = tmp_path / "bad.png"
    bad.write_bytes(corrupt_idat(good.read_bytes()))
    with pytest.raises(ImageError, match="damaged"):
        load_image(bad)
    with pytest.raises(ImageError, match="damaged"):
        measure(bad)


def test_16bit_colour_png_with_corrupt_deflate_stream_is_damaged(tmp_path):
    good = png16_rgba(tmp_path / "good.png", 60, 70)
    bad = tmp_path / "bad.png"
    bad.write_bytes(corrupt_idat(good.read_bytes()))
    with pytest.raises(ImageError, match="damaged"):
        load_image(bad)


def test_truncated_png_refused_even_if_pillow_is_told_to_accept_it(tmp_path, monkeypatch):
    monkeypatch.setattr(ImageFile, "LOAD_TRUNCATED_IMAGES", True)
    data = scan(tmp_path / "good.png").read_bytes()
    cut = tmp_path / "cut.png"
    cut.write_bytes(data[: len(data) // 2])
    with pytest.raises(ImageError, match="truncated or damaged"):
        load_image(cut)
    assert ImageFile.LOAD_TRUNCATED_IMAGES is True  # the caller's setting is left as it was


def test_jpeg_with_20_corrupted_bytes_is_damaged(tmp_path):
    a = np.full((400, 600), 230, np.uint8)
    a[100:300, 100:250] = 20
    a[150:250, 350:500] = 30
    buf = io.BytesIO()
    Image.fromarray(a).save(buf, "JPEG", quality=90, dpi=(300, 300))
    data = buf.getvalue()
    good = tmp_path / "good.jpg"
    good.write_bytes(data)
    assert load_image(good).grey.shape == (400, 600)  # control: the intact file loads
    rng = np.random.default_rng(13)
    refused = 0
    for trial in range(10):
        d = bytearray(data)
        for pos in rng.integers(len(d) // 3, len(d) - 10, 20):  # inside the entropy-coded data
            d[pos] = (d[pos] + 1 + int(rng.integers(0, 255))) % 256
        bad = tmp_path / f"bad{trial}.jpg"
        bad.write_bytes(bytes(d))
        with pytest.raises(ImageError, match="damaged"):
            load_image(bad)
        refused += 1
    assert refused == 10


def test_float64_tiff_is_unsupported_not_damaged(tmp_path):
    tifffile = pytest.importorskip("tifffile")
    path = tmp_path / "f64.tif"
    tifffile.imwrite(path, np.random.default_rng(1).random((32, 32)))
    with pytest.raises(ImageError, match="float64.*not supported") as info:
        load_image(path)
    assert "damaged" not in str(info.value)


# ------------------------------------------------------------------------------------------
# implausible DPI in the file: unknown, saying it came from the file
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("dpi", [(1, 1), (300, 1), (300, 30), (30, 30), (300, 310)])
def test_implausible_file_dpi_is_unknown(tmp_path, dpi):
    path = tmp_path / "d.png"
    Image.new("L", (16, 16)).save(path, dpi=dpi)
    img = load_image(path)
    assert img.dpi is None and "came from the file" in img.dpi_note


def test_implausible_file_dpi_fails_the_scale_with_the_files_value(tmp_path):
    image = tmp_path / "scan.png"
    a = np.full((300, 400), 240, np.uint8)
    a[50:100, 50:120] = 20
    Image.fromarray(a).save(image, dpi=(300, 30))
    result = runner.invoke(app, ["measure", str(image)])
    one_line_error(result, "came from the file", "--dpi")


def test_plausible_file_dpi_is_kept(tmp_path):
    path = tmp_path / "d.png"
    Image.new("L", (16, 16)).save(path, dpi=(600, 602))  # within 1 %
    assert load_image(path).dpi == (600.0, 602.0)


# ------------------------------------------------------------------------------------------
# holes filled below --min-hole-area: counted and warned
# ------------------------------------------------------------------------------------------
def test_filled_holes_are_counted_and_warned(tmp_path):
    image = scan(tmp_path / "holes.png", holes=True)
    # hole areas (closed form): 10 x 10 px and 30 x 30 px at 25.4/300 mm per px
    small, large = 100 * MM_PER_PX**2, 900 * MM_PER_PX**2
    m = measure(image, min_hole_area_mm2=(small + large) / 2)
    part = max(m.parts, key=lambda p: p.area_mm2)
    assert len(part.holes) == 1 and part.filled_holes == 1
    assert part.filled_hole_area_mm2 == pytest.approx(small, rel=0.05)  # sub-pixel outline of a 10 px square
    assert any("1 hole(s) smaller than the minimum hole area" in w for w in m.warnings)
    doc = json.loads(m.to_json())
    assert doc["parts"][[p["label"] for p in doc["parts"]].index(part.label)]["filled_holes"] == 1
    m2 = measure(image, min_hole_area_mm2=small / 2)
    assert all(p.filled_holes == 0 for p in m2.parts) and not any("filled" in w for w in m2.warnings)


# ------------------------------------------------------------------------------------------
# names that are not UTF-8
# ------------------------------------------------------------------------------------------
def test_non_utf8_name_through_measure_report_and_export(tmp_path):
    folder = os.fsencode(tmp_path)
    name = folder + b"/\xdcbersicht.png"  # Latin-1 "Übersicht.png"
    scan(Path(os.fsdecode(name)))
    out_json = os.fsdecode(folder + b"/\xdc.json")
    out_csv = os.fsdecode(folder + b"/\xdc.csv")
    out_png = os.fsdecode(folder + b"/\xdc-overlay.png")
    result = runner.invoke(
        app, ["measure", os.fsdecode(name), "-q", "--json", out_json, "--csv", out_csv, "--overlay", out_png]
    )
    assert result.exit_code == 0, result.output
    doc = json.loads(Path(out_json).read_bytes().decode("utf-8"))  # strict UTF-8 and JSON
    assert doc["source"]["path"].endswith("\\xdcbersicht.png")
    rows = Path(out_csv).read_bytes().decode("utf-8").splitlines()
    assert rows[1].split(",")[0].endswith("\\xdcbersicht.png")
    html = os.fsdecode(folder + b"/\xdc.html")
    assert runner.invoke(app, ["report", out_json, "--html", html]).exit_code == 0
    svg = os.fsdecode(folder + b"/\xdc.svg")
    assert runner.invoke(app, ["export", out_json, "--svg", svg]).exit_code == 0
    assert display_path(name).endswith("\\xdcbersicht.png")


def test_error_messages_escape_undecodable_bytes(tmp_path):
    name = os.fsdecode(os.fsencode(tmp_path) + b"/\xff.png")
    Path(name).write_bytes(b"not an image")
    with pytest.raises(ImageError) as info:
        load_image(name)
    str(info.value).encode("utf-8")  # no lone surrogates
    assert "\\xff.png" in str(info.value)


# ------------------------------------------------------------------------------------------
# result documents with wrong part labels
# ------------------------------------------------------------------------------------------
@pytest.mark.parametrize("label", ["A", 1.5, None, True])
def test_report_with_non_integer_part_label_is_one_line(tmp_path, label):
    m = measure(scan(tmp_path / "scan.png"))
    doc = json.loads(m.to_json())
    doc["parts"][0]["label"] = label
    path = tmp_path / "r.json"
    path.write_text(json.dumps(doc), encoding="utf-8")
    with pytest.raises(ResultFormatError, match="label"):
        read_result(path)
    result = runner.invoke(app, ["report", str(path), "--html", str(tmp_path / "r.html")])
    one_line_error(result, "label")


def test_deeply_nested_result_json_is_one_line(tmp_path):
    path = tmp_path / "deep.json"
    path.write_text("[" * 100_000 + "]" * 100_000, encoding="utf-8")
    with pytest.raises(ResultFormatError, match="nested too deeply|not a scanmass result"):
        read_result(path)


def test_enospc_message_names_the_stream():
    exc = OSError(errno.ENOSPC, "No space left on device")
    assert "full" in str(atomic._stream_error(atomic._Target(given="-", kind="stdout"), exc))


def test_report_overlay_on_dev_zero_is_one_line(tmp_path):
    m = measure(scan(tmp_path / "scan.png"))
    result_json = tmp_path / "r.json"
    result_json.write_text(m.to_json(), encoding="utf-8")
    zero = link(tmp_path, "ov.png", "/dev/zero")
    result = runner.invoke(
        app, ["report", str(result_json), "--overlay", str(zero), "--html", str(tmp_path / "r.html")]
    )
    one_line_error(result, "character device")
