"""Tests of scanmass.outputs.atomic: atomic writes that never overwrite an input."""

from __future__ import annotations

import os
import stat

import numpy as np
import pytest
from PIL import Image
from plate_parts import make_measurement, make_part, rect

from scanmass.errors import OutputError
from scanmass.outputs.atomic import atomic_path, write_atomic
from scanmass.outputs.writers import write_outputs


def opened(path) -> Image.Image:
    """A fully loaded copy of an image file, with the file closed again."""
    with Image.open(path) as im:
        im.load()
        return im.copy()


def leftovers(folder):
    return sorted(p.name for p in folder.iterdir() if ".tmp" in p.name)


def expect_error(path, match, func, *args, **kw):
    with pytest.raises(OutputError, match=match) as info:
        func(*args, **kw)
    message = str(info.value)
    assert "\n" not in message and str(path) in message
    return message


def test_write_text_and_bytes(tmp_path):
    out = write_atomic(tmp_path / "r.json", '{"a": 1}\n')
    assert out == tmp_path / "r.json"
    assert out.read_text() == '{"a": 1}\n'
    write_atomic(out, b"\x00\x01")
    assert out.read_bytes() == b"\x00\x01"
    write_atomic(tmp_path / "empty.csv", "")
    assert (tmp_path / "empty.csv").read_bytes() == b""
    assert leftovers(tmp_path) == []


def test_str_is_utf8_without_newline_translation(tmp_path):
    out = write_atomic(tmp_path / "u.csv", "Stahl 1.4301;Ø 12 mm\r\n")
    assert out.read_bytes() == "Stahl 1.4301;Ø 12 mm\r\n".encode()


def test_new_file_gets_umask_permissions(tmp_path):
    old = os.umask(0o027)
    try:
        out = write_atomic(tmp_path / "p.txt", "x")
    finally:
        os.umask(old)
    assert stat.S_IMODE(out.stat().st_mode) == 0o640  # 0666 & ~0027, as open() would


def test_replacing_keeps_permissions(tmp_path):
    out = tmp_path / "keep.txt"
    out.write_text("old")
    out.chmod(0o604)
    write_atomic(out, "new")
    assert out.read_text() == "new"
    assert stat.S_IMODE(out.stat().st_mode) == 0o604


def test_refuses_to_overwrite_input(tmp_path):
    source = tmp_path / "scan.png"
    source.write_bytes(b"pixels")
    for spelling in [source, tmp_path / "sub" / ".." / "scan.png", str(source)]:
        (tmp_path / "sub").mkdir(exist_ok=True)
        expect_error(spelling, "would overwrite the input file", write_atomic, spelling, "x", inputs=[source])
    assert source.read_bytes() == b"pixels"
    assert leftovers(tmp_path) == []


def test_refuses_symlink_and_hard_link_to_input(tmp_path):
    source = tmp_path / "scan.png"
    source.write_bytes(b"pixels")
    link = tmp_path / "link.png"
    link.symlink_to(source)
    expect_error(link, "would overwrite the input", write_atomic, link, "x", inputs=[source])
    hard = tmp_path / "hard.png"
    os.link(source, hard)
    expect_error(hard, "would overwrite the input", write_atomic, hard, "x", inputs=[source])
    assert source.read_bytes() == b"pixels"


def test_missing_folder(tmp_path):
    out = tmp_path / "no" / "such" / "r.json"
    message = expect_error(out, "does not exist", write_atomic, out, "x")
    assert "create it" in message


def test_path_is_a_folder(tmp_path):
    expect_error(tmp_path, "is a folder", write_atomic, tmp_path, "x")


def test_parent_is_a_file(tmp_path):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    out = blocker / "r.json"
    expect_error(out, "not a folder", write_atomic, out, "x")


def test_folder_not_writable(tmp_path):
    if os.geteuid() == 0:
        pytest.skip("root writes anywhere")
    folder = tmp_path / "ro"
    folder.mkdir()
    folder.chmod(0o500)
    try:
        expect_error(folder / "r.json", "not writable", write_atomic, folder / "r.json", "x")
    finally:
        folder.chmod(0o700)


def test_dash_goes_to_stdout_and_empty_is_refused(tmp_path, capsysbinary):
    write_atomic("-", "x")  # '-' is standard output, written straight through (issue 13)
    assert capsysbinary.readouterr().out == b"x"
    with pytest.raises(OutputError, match="empty"):
        write_atomic("", "x")


def test_wrong_data_type(tmp_path):
    expect_error(tmp_path / "r.json", "bytes or str", write_atomic, tmp_path / "r.json", {"a": 1})


def test_failed_replace_leaves_original_and_no_temp(tmp_path, monkeypatch):
    out = tmp_path / "r.json"
    out.write_text("old")

    def broken_replace(src, dst):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(os, "replace", broken_replace)
    expect_error(out, "No space left", write_atomic, out, "new")
    assert out.read_text() == "old"
    assert leftovers(tmp_path) == []


def test_atomic_path_success_keeps_extension(tmp_path):
    out = tmp_path / "overlay.png"
    with atomic_path(out) as tmp:
        assert tmp.parent == tmp_path and tmp.suffix == ".png" and tmp != out
        Image.new("L", (10, 10), 7).save(tmp)
    assert np.asarray(opened(out))[0, 0] == 7
    assert leftovers(tmp_path) == []


def test_atomic_path_with_opencv_writer(tmp_path):
    cv2 = pytest.importorskip("cv2")
    out = tmp_path / "overlay.png"
    with atomic_path(out) as tmp:
        assert cv2.imwrite(str(tmp), np.full((8, 8), 200, np.uint8))
    assert np.asarray(opened(out))[0, 0] == 200


def test_atomic_path_failure_removes_temp_and_keeps_original(tmp_path):
    out = tmp_path / "report.svg"
    out.write_text("old")
    with pytest.raises(RuntimeError):
        with atomic_path(out) as tmp:
            tmp.write_text("half")
            raise RuntimeError("renderer crashed")
    assert out.read_text() == "old"
    assert leftovers(tmp_path) == []


def test_atomic_path_nothing_written(tmp_path):
    out = tmp_path / "overlay.png"
    out.write_text("old")
    expect_error(out, "nothing was written", _empty_block, out)
    assert out.read_text() == "old"
    assert leftovers(tmp_path) == []


def _empty_block(out):
    with atomic_path(out):
        pass  # a writer that failed silently (cv2.imwrite returns False)


def test_atomic_path_refuses_input(tmp_path):
    source = tmp_path / "scan.jpg"
    source.write_bytes(b"jpeg")
    with pytest.raises(OutputError, match="would overwrite the input"):
        with atomic_path(source, inputs=[source]):
            pytest.fail("must not be reached")
    assert leftovers(tmp_path) == []


def test_none_among_the_inputs_is_skipped(tmp_path):
    # a result read from JSON may name no source image: its None must not stop the write
    target = tmp_path / "r.json"
    write_atomic(target, "{}", inputs=[None, tmp_path / "other.json"])
    assert target.read_text() == "{}"


def test_overlay_of_a_result_without_a_source_file_is_a_one_line_error(tmp_path):
    m = make_measurement([make_part([rect(20, 10)])])
    m.source.path = None
    with pytest.raises(OutputError, match="names no source file") as err:
        write_outputs(m, json_out=tmp_path / "r.json", overlay_out=tmp_path / "o.png")
    assert "\n" not in str(err.value) and str(tmp_path / "o.png") in str(err.value)
    assert not (tmp_path / "o.png").exists()
