"""Tests of scanmass.load.decode: decoding, orientation, DPI, tone curves and guards.

Every file is generated here with pillow, numpy, tifffile or a few lines of PNG/ICC
byte assembly; no binaries are committed. Reference values name their source.
"""

from __future__ import annotations

import hashlib
import io
import struct
import zlib
from pathlib import Path

import numpy as np
import pytest
from PIL import Image, ImageCms, ImageOps

from scanmass.errors import ImageError, OptionError
from scanmass.load.decode import (
    DEFAULT_MAX_PIXELS,
    UNKNOWN_DPI_VALUES,
    LoadedImage,
    load_image,
    read_dpi,
    srgb_to_linear,
)

RNG = np.random.default_rng(20240611)


def opened(path) -> Image.Image:
    """A fully loaded copy of an image file, with the file closed again."""
    with Image.open(path) as im:
        im.load()
        return im.copy()


# ------------------------------------------------------------------ helpers


def srgb_formula(c):
    """IEC 61966-2-1:1999 section 5.2, written out independently of the library."""
    c = np.asarray(c, dtype=np.float64)
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def luma601(rgb):
    """ITU-R BT.601 luma Y' = 0.299 R' + 0.587 G' + 0.114 B' of encoded values."""
    rgb = rgb.astype(np.float64)
    return 0.299 * rgb[..., 0] + 0.587 * rgb[..., 1] + 0.114 * rgb[..., 2]


def png_chunk(kind: bytes, payload: bytes) -> bytes:
    # W3C PNG specification, 5.3: length, type, data, CRC-32 of type + data.
    return struct.pack(">I", len(payload)) + kind + payload + struct.pack(">I", zlib.crc32(kind + payload))


def png_bytes(arr: np.ndarray, colour_type: int, bit_depth: int = 8, chunks=(), size=None) -> bytes:
    """A PNG written by hand (filter 0 on every row), with extra chunks before IDAT."""
    height, width = arr.shape[:2] if size is None else size[::-1]
    dtype = ">u2" if bit_depth == 16 else "u1"
    rows = arr.astype(dtype).reshape(arr.shape[0], -1) if arr.size else np.zeros((0, 0), dtype)
    raw = b"".join(b"\x00" + row.tobytes() for row in rows)
    ihdr = struct.pack(">IIBBBBB", width, height, bit_depth, colour_type, 0, 0, 0)
    out = b"\x89PNG\r\n\x1a\n" + png_chunk(b"IHDR", ihdr)
    for kind, payload in chunks:
        out += png_chunk(kind, payload)
    return out + png_chunk(b"IDAT", zlib.compress(raw)) + png_chunk(b"IEND", b"")


def icc_profile(space: bytes, tags: dict[bytes, bytes]) -> bytes:
    """A minimal ICC profile: 128-byte header, tag table, tag data (ICC.1:2010, 7.2-7.3)."""
    header = bytearray(128)
    header[8:12] = bytes([2, 0x10, 0, 0])  # version 2.1
    header[12:16] = b"mntr"
    header[16:20] = space
    header[20:24] = b"XYZ "
    header[36:40] = b"acsp"
    table = struct.pack(">I", len(tags))
    data = b""
    offset = 128 + 4 + 12 * len(tags)
    for sig, body in tags.items():
        body = body + b"\x00" * (-len(body) % 4)
        table += struct.pack(">4sII", sig, offset + len(data), len(body))
        data += body
    profile = bytes(header) + table + data
    return struct.pack(">I", len(profile)) + profile[4:]


def curv(entries) -> bytes:
    """curveType (ICC.1:2010 10.5): 'curv', reserved, count, uInt16 entries."""
    return b"curv" + bytes(4) + struct.pack(f">I{len(entries)}H", len(entries), *entries)


def para(kind: int, params) -> bytes:
    """parametricCurveType (ICC.1:2010 10.15): s15Fixed16 parameters."""
    return (
        b"para"
        + bytes(4)
        + struct.pack(">HH", kind, 0)
        + struct.pack(f">{len(params)}i", *[round(p * 65536) for p in params])
    )


def save(tmp_path: Path, name: str, image: Image.Image, **kw) -> Path:
    path = tmp_path / name
    image.save(path, **kw)
    return path


def gradient_rgb(height=48, width=64) -> np.ndarray:
    y, x = np.mgrid[0:height, 0:width]
    return np.dstack([x * 255 // (width - 1), y * 255 // (height - 1), (x * 7 + y * 3) % 256]).astype(np.uint8)


def expect_error(exc_type, path, match, func, *args, **kw):
    """Call, expect exc_type with a one-line message naming the path."""
    with pytest.raises(exc_type, match=match) as info:
        func(*args, **kw)
    message = str(info.value)
    assert "\n" not in message
    if path is not None:
        assert str(path) in message
    return message


# ------------------------------------------------------------- modes and depths


def test_grey8_png_is_exact(tmp_path):
    grey = RNG.integers(0, 256, (40, 50), dtype=np.uint8)
    path = save(tmp_path, "g.png", Image.fromarray(grey))
    img = load_image(path)
    assert isinstance(img, LoadedImage)
    np.testing.assert_array_equal(img.grey, grey)
    assert img.grey.dtype == np.uint8 and img.grey.flags.c_contiguous
    assert (img.width_px, img.height_px) == (50, 40)
    assert (img.format, img.mode, img.bit_depth, img.orientation) == ("PNG", "L", 8, 1)
    assert img.to_linear.shape == (256,) and img.to_linear.dtype == np.float32
    assert img.path == str(path)
    assert img.sha256 == hashlib.sha256(path.read_bytes()).hexdigest()


@pytest.mark.parametrize("ext", ["png", "tif"])
def test_rgb8_matches_pillow_luma(tmp_path, ext):
    rgb = RNG.integers(0, 256, (30, 40, 3), dtype=np.uint8)
    path = save(tmp_path, f"c.{ext}", Image.fromarray(rgb))
    img = load_image(path)
    # Reference library: pillow's own RGB -> L conversion.
    np.testing.assert_array_equal(img.grey, np.asarray(Image.fromarray(rgb).convert("L")))
    # ITU-R BT.601 luma, rounded.
    assert np.max(np.abs(img.grey - luma601(rgb))) <= 0.5 + 1e-6


def test_rgb_jpeg_uses_luma_close_to_pillow(tmp_path):
    path = save(tmp_path, "c.jpg", Image.fromarray(gradient_rgb()), quality=95)
    img = load_image(path)
    reference = np.asarray(opened(path).convert("L")).astype(int)
    # libjpeg's Y plane vs pillow's RGB -> L of the decoded RGB: equal up to the
    # chroma reconstruction, a few levels at most.
    diff = np.abs(img.grey.astype(int) - reference)
    assert diff.max() <= 10 and diff.mean() < 0.5
    assert (img.format, img.mode, img.bit_depth) == ("JPEG", "RGB", 8)


def test_grey_jpeg(tmp_path):
    grey = np.tile(np.arange(0, 256, 4, dtype=np.uint8), (16, 1))
    path = save(tmp_path, "g.jpg", Image.fromarray(grey), quality=100)
    img = load_image(path)
    assert img.mode == "L"
    assert np.max(np.abs(img.grey.astype(int) - grey)) <= 2


@pytest.mark.parametrize("ext", ["png", "tif"])
def test_rgba_is_composited_over_white(tmp_path, ext):
    rgba = RNG.integers(0, 256, (24, 32, 4), dtype=np.uint8)
    rgba[0, 0, 3] = 0  # fully transparent -> white
    rgba[0, 1, 3] = 255  # opaque -> its own luma
    path = save(tmp_path, f"a.{ext}", Image.fromarray(rgba, "RGBA"))
    img = load_image(path)
    alpha = rgba[..., 3] / 255.0
    # "over" operator (Porter & Duff 1984) on encoded values, white background.
    expected = luma601(rgba[..., :3]) * alpha + 255.0 * (1 - alpha)
    assert np.max(np.abs(img.grey - expected)) <= 1.0
    assert img.grey[0, 0] == 255
    # Reference library: pillow's alpha_composite over white, then RGB -> L.
    white = Image.new("RGBA", (32, 24), (255, 255, 255, 255))
    ref = np.asarray(Image.alpha_composite(white, Image.fromarray(rgba, "RGBA")).convert("L")).astype(int)
    assert np.max(np.abs(img.grey.astype(int) - ref)) <= 1


def test_la_png(tmp_path):
    la = RNG.integers(0, 256, (20, 30, 2), dtype=np.uint8)
    path = save(tmp_path, "la.png", Image.fromarray(la, "LA"))
    img = load_image(path)
    alpha = la[..., 1] / 255.0
    expected = la[..., 0] * alpha + 255.0 * (1 - alpha)
    assert img.mode == "LA"
    assert np.max(np.abs(img.grey - expected)) <= 0.5 + 1e-6


def test_palette_png(tmp_path):
    rgb = gradient_rgb()
    pal = Image.fromarray(rgb).quantize(16)
    path = save(tmp_path, "p.png", pal)
    img = load_image(path)
    assert img.mode == "P"
    np.testing.assert_array_equal(img.grey, np.asarray(pal.convert("L")))


def test_palette_png_transparency_is_white(tmp_path):
    pal = Image.new("P", (16, 16), 0)
    pal.putpalette([0, 0, 0, 10, 10, 10] + [0] * (254 * 3))
    pal.paste(1, (0, 0, 8, 16))
    path = save(tmp_path, "pt.png", pal, transparency=0)
    img = load_image(path)
    assert np.all(img.grey[:, 8:] == 255)  # index 0 is transparent
    assert np.all(img.grey[:, :8] == 10)


@pytest.mark.parametrize("ext", ["png", "tif"])
def test_bilevel(tmp_path, ext):
    bits = RNG.integers(0, 2, (20, 24)).astype(bool)
    path = save(tmp_path, f"b.{ext}", Image.fromarray(bits))
    img = load_image(path)
    assert img.mode == "1" and img.bit_depth == 1
    np.testing.assert_array_equal(img.grey, np.where(bits, 255, 0))
    assert img.to_linear[0] == 0.0 and img.to_linear[255] == 1.0


@pytest.mark.parametrize("ext", ["jpg", "tif"])
def test_cmyk(tmp_path, ext):
    cmyk = Image.fromarray(RNG.integers(0, 256, (16, 24, 4), dtype=np.uint8), "CMYK")
    path = save(tmp_path, f"k.{ext}", cmyk, **({"quality": 100} if ext == "jpg" else {}))
    img = load_image(path)
    assert img.mode == "CMYK"
    # Reference library: pillow's CMYK -> L of the same decoded file.
    ref = np.asarray(opened(path).convert("L")).astype(int)
    assert np.max(np.abs(img.grey.astype(int) - ref)) <= (0 if ext == "tif" else 1)
    assert img.encoding.startswith("sRGB (assumed")


@pytest.mark.parametrize("ext", ["png", "tif"])
def test_grey16_keeps_16_bits(tmp_path, ext):
    grey = RNG.integers(0, 65536, (20, 30), dtype=np.uint16)
    path = save(tmp_path, f"g16.{ext}", Image.fromarray(grey))
    img = load_image(path)
    assert img.mode.startswith("I;16") and img.bit_depth == 16
    assert img.grey.dtype == np.uint16
    np.testing.assert_array_equal(img.grey, grey)
    assert img.to_linear.shape == (65536,)


def test_grey16_big_endian_tiff(tmp_path):
    grey = RNG.integers(0, 65536, (12, 10), dtype=np.uint16)
    im = Image.frombytes("I;16B", (10, 12), grey.astype(">u2").tobytes())
    path = save(tmp_path, "be.tif", im)
    img = load_image(path)
    np.testing.assert_array_equal(img.grey, grey)
    assert img.grey.dtype == np.dtype(np.uint16)


def test_grey16_png_written_by_hand(tmp_path):
    grey = RNG.integers(0, 65536, (9, 11), dtype=np.uint16)
    path = tmp_path / "g16h.png"
    path.write_bytes(png_bytes(grey, 0, 16))
    np.testing.assert_array_equal(load_image(path).grey, grey)


def test_int32_tiff_within_16_bits(tmp_path):
    values = RNG.integers(0, 65536, (10, 12)).astype(np.int32)
    path = save(tmp_path, "i.tif", Image.fromarray(values))
    img = load_image(path)
    assert img.mode == "I"
    np.testing.assert_array_equal(img.grey, values.astype(np.uint16))


def test_float_tiff_is_linear(tmp_path):
    values = RNG.random((10, 12)).astype(np.float32)
    path = save(tmp_path, "f.tif", Image.fromarray(values))
    img = load_image(path)
    assert img.encoding.startswith("linear")
    assert np.max(np.abs(img.linear() - values)) <= 0.5 / 65535 + 1e-7


def test_rgb16_png_keeps_16_bits(tmp_path):
    rgb = RNG.integers(0, 65536, (12, 16, 3), dtype=np.uint16)
    path = tmp_path / "c16.png"
    path.write_bytes(png_bytes(rgb, 2, 16))
    img = load_image(path)
    assert img.grey.dtype == np.uint16 and img.bit_depth == 16
    # ITU-R BT.601 luma computed on the 16-bit encoded values.
    assert np.max(np.abs(img.grey - luma601(rgb))) <= 0.5 + 1e-3
    assert np.any(img.grey % 257 != 0)  # not an 8-bit image scaled up
    assert img.to_linear.shape == (65536,)


def test_rgba16_png_composited(tmp_path):
    rgba = RNG.integers(0, 65536, (10, 12, 4), dtype=np.uint16)
    rgba[0, 0, 3] = 0
    path = tmp_path / "c16a.png"
    path.write_bytes(png_bytes(rgba, 6, 16))
    img = load_image(path)
    alpha = rgba[..., 3] / 65535.0
    expected = luma601(rgba) * alpha + 65535.0 * (1 - alpha)
    assert np.max(np.abs(img.grey - expected)) <= 1.0
    assert img.grey[0, 0] == 65535


def test_la16_png_composited(tmp_path):
    la = RNG.integers(0, 65536, (10, 12, 2), dtype=np.uint16)
    path = tmp_path / "la16.png"
    path.write_bytes(png_bytes(la, 4, 16))
    img = load_image(path)
    alpha = la[..., 1] / 65535.0
    expected = la[..., 0] * alpha + 65535.0 * (1 - alpha)
    assert img.grey.dtype == np.uint16
    assert np.max(np.abs(img.grey - expected)) <= 1.0


def test_rgb16_tiff_keeps_16_bits(tmp_path):
    tifffile = pytest.importorskip("tifffile")
    rgb = RNG.integers(0, 65536, (12, 16, 3), dtype=np.uint16)
    path = tmp_path / "c16.tif"
    tifffile.imwrite(path, rgb, photometric="rgb")
    img = load_image(path)
    assert img.grey.dtype == np.uint16
    assert np.max(np.abs(img.grey - luma601(rgb))) <= 0.5 + 1e-3


def test_mpo_like_jpeg_with_second_frame(tmp_path):
    # Phones write MPO (CIPA DC-007): a JPEG followed by more pictures. Pillow
    # can write one; the first frame must be the one measured.
    first = Image.fromarray(gradient_rgb())
    second = Image.new("RGB", first.size, (0, 0, 0))
    path = tmp_path / "m.jpg"
    first.save(path, format="MPO", save_all=True, append_images=[second], quality=95)
    img = load_image(path)
    assert img.format == "JPEG"
    assert img.grey.mean() > 60


# ----------------------------------------------------------------- orientation


@pytest.mark.parametrize("orientation", range(1, 9))
def test_orientation_matches_pillow_exif_transpose(tmp_path, orientation):
    grey = RNG.integers(0, 256, (12, 20), dtype=np.uint8)
    exif = Image.Exif()
    exif[0x0112] = orientation
    path = save(tmp_path, f"o{orientation}.png", Image.fromarray(grey), exif=exif)
    img = load_image(path)
    # Reference library: PIL.ImageOps.exif_transpose.
    expected = np.asarray(ImageOps.exif_transpose(opened(path)))
    np.testing.assert_array_equal(img.grey, expected)
    assert img.orientation == orientation
    assert img.grey.flags.c_contiguous
    assert (img.height_px, img.width_px) == expected.shape


def _marked_jpeg(tmp_path, orientation):
    """80 x 60 white picture, black 16 x 16 block in the stored top-left corner."""
    grey = np.full((60, 80), 255, np.uint8)
    grey[:16, :16] = 0
    exif = Image.Exif()
    exif[0x0112] = orientation
    return save(tmp_path, f"m{orientation}.jpg", Image.fromarray(grey), exif=exif, quality=95)


@pytest.mark.parametrize(
    "orientation, shape, corner",
    [
        # Exif 2.32 tag 0x0112: 6 = the stored row 0 is the visual right side
        # (display rotates 90 degrees clockwise), 8 = the visual left side,
        # 3 = rotated 180 degrees.
        (6, (80, 60), (slice(0, 16), slice(-16, None))),
        (8, (80, 60), (slice(-16, None), slice(0, 16))),
        (3, (60, 80), (slice(-16, None), slice(-16, None))),
        (1, (60, 80), (slice(0, 16), slice(0, 16))),
    ],
)
def test_orientation_moves_marked_corner(tmp_path, orientation, shape, corner):
    img = load_image(_marked_jpeg(tmp_path, orientation))
    assert img.grey.shape == shape
    assert img.orientation == orientation
    assert img.grey[corner].mean() < 40
    corners = [
        (slice(0, 16), slice(0, 16)),
        (slice(0, 16), slice(-16, None)),
        (slice(-16, None), slice(0, 16)),
        (slice(-16, None), slice(-16, None)),
    ]
    for other in corners:
        if other != corner:
            assert img.grey[other].mean() > 215


def test_orientation_tiff_tag(tmp_path):
    grey = np.full((20, 30), 200, np.uint8)
    grey[0, 0] = 0
    path = save(tmp_path, "o.tif", Image.fromarray(grey), tiffinfo={274: 6})
    img = load_image(path)
    assert img.orientation == 6 and img.grey.shape == (30, 20)
    assert img.grey[0, -1] == 0


def test_orientation_16bit_colour_tiff_applied_once(tmp_path):
    tifffile = pytest.importorskip("tifffile")
    rgb = np.full((20, 30, 3), 50000, np.uint16)
    rgb[0, 0] = 0
    path = tmp_path / "o16.tif"
    tifffile.imwrite(path, rgb, photometric="rgb", extratags=[(274, "H", 1, 6, True)])
    img = load_image(path)
    assert img.orientation == 6 and img.grey.shape == (30, 20)
    assert img.grey[0, -1] == 0 and img.grey.dtype == np.uint16


def test_orientation_swaps_anisotropic_dpi(tmp_path):
    exif = Image.Exif()
    exif[0x0112] = 6
    # 300 x 302 dpi: within the 1 % a file may differ between x and y (issue 13)
    path = save(tmp_path, "a.png", Image.fromarray(np.zeros((10, 20), np.uint8)), exif=exif, dpi=(300, 302))
    img = load_image(path)
    assert img.dpi == (302.0, 300.0)
    assert "swapped" in img.dpi_note


# ------------------------------------------------------------------------ DPI


def test_png_dpi_300_from_pixels_per_metre(tmp_path):
    path = save(tmp_path, "d.png", Image.new("L", (10, 10)), dpi=(300, 300))
    img = load_image(path)
    # 300 dpi = 300 / 0.0254 px/m = 11811.02 -> stored as 11811 px/m = 299.9994 dpi
    # (W3C PNG specification 11.3.5.3, unit 1 = metre).
    assert img.dpi == (300.0, 300.0)
    assert "11811" in img.dpi_note and "299.9994" in img.dpi_note and "read as 300" in img.dpi_note
    assert read_dpi(path) == (img.dpi, img.dpi_note)


def test_png_dpi_not_a_whole_number_is_kept(tmp_path):
    phys = struct.pack(">IIB", 11800, 11800, 1)  # 11800 px/m = 299.72 dpi
    path = tmp_path / "d.png"
    path.write_bytes(png_bytes(np.zeros((10, 10)), 0, chunks=[(b"pHYs", phys)]))
    img = load_image(path)
    assert img.dpi == pytest.approx((299.72, 299.72))
    assert "read as" not in img.dpi_note


def test_png_low_whole_dpi_is_recovered(tmp_path):
    # 50 dpi = 1968.5 px/m, stored as 1969 -> 50.0126 dpi; still the rounding of 50.
    path = save(tmp_path, "d.png", Image.new("L", (10, 10)), dpi=(50, 50))
    assert load_image(path).dpi == (50.0, 50.0)


def test_png_anisotropic_dpi_is_unknown(tmp_path):
    # x and y differing by more than 1 % is taken as junk from the file (issue 13)
    path = save(tmp_path, "d.png", Image.new("L", (10, 10)), dpi=(300, 600))
    img = load_image(path)
    assert img.dpi is None and "came from the file" in img.dpi_note


def test_png_phys_unit_0_is_no_dpi(tmp_path):
    phys = struct.pack(">IIB", 1, 1, 0)  # aspect ratio only
    path = tmp_path / "d.png"
    path.write_bytes(png_bytes(np.zeros((10, 10)), 0, chunks=[(b"pHYs", phys)]))
    img = load_image(path)
    assert img.dpi is None and "aspect ratio" in img.dpi_note


def test_png_without_phys(tmp_path):
    path = save(tmp_path, "d.png", Image.new("L", (10, 10)))
    img = load_image(path)
    assert img.dpi is None and "no DPI" in img.dpi_note


@pytest.mark.parametrize("value", UNKNOWN_DPI_VALUES)
@pytest.mark.parametrize("ext", ["png", "jpg", "tif"])
def test_software_default_dpi_is_unknown(tmp_path, value, ext):
    path = save(tmp_path, f"d.{ext}", Image.new("L", (10, 10)), dpi=(value, value))
    img = load_image(path)
    assert img.dpi is None
    assert f"{value:g} dpi is a software default, not a measurement" in img.dpi_note


def test_default_on_one_axis_is_unknown(tmp_path):
    path = save(tmp_path, "d.tif", Image.new("L", (10, 10)), dpi=(300, 72))
    assert load_image(path).dpi is None


def test_jpeg_jfif_dpi(tmp_path):
    path = save(tmp_path, "d.jpg", Image.new("L", (10, 10)), dpi=(600, 600))
    img = load_image(path)
    assert img.dpi == (600.0, 600.0) and "JFIF" in img.dpi_note


def test_jpeg_jfif_unit_0_is_no_dpi(tmp_path):
    path = save(tmp_path, "d.jpg", Image.new("L", (10, 10)))
    assert opened(path).info["jfif_unit"] == 0  # precondition: pillow's default
    img = load_image(path)
    assert img.dpi is None and "no unit" in img.dpi_note


def test_jpeg_jfif_dots_per_cm(tmp_path):
    buf = io.BytesIO()
    Image.new("L", (10, 10)).save(buf, "JPEG", dpi=(1, 1))
    data = bytearray(buf.getvalue())
    # JFIF APP0 (ITU-T T.871 10.1): SOI, APP0 marker, length, "JFIF\0", version,
    # then units at byte 13 and Xdensity, Ydensity.
    assert data[6:11] == b"JFIF\x00"
    data[13] = 2
    data[14:18] = struct.pack(">HH", 118, 118)
    path = tmp_path / "cm.jpg"
    path.write_bytes(bytes(data))
    img = load_image(path)
    assert img.dpi == pytest.approx((118 * 2.54, 118 * 2.54))  # 1 in = 2.54 cm


@pytest.mark.parametrize("unit, value, expected", [(2, 300, 300.0), (3, 118.11, 300.0), (2, 72, None)])
def test_jpeg_exif_resolution(tmp_path, unit, value, expected):
    exif = Image.Exif()
    exif[0x011A] = value
    exif[0x011B] = value
    exif[0x0128] = unit
    path = save(tmp_path, "e.jpg", Image.new("L", (10, 10)), exif=exif)
    img = load_image(path)
    assert img.dpi == (None if expected is None else (expected, expected))
    assert "EXIF" in img.dpi_note


def test_jpeg_exif_without_resolution_is_not_72(tmp_path):
    # Pillow's own info["dpi"] says 72 here; the loader must not.
    exif = Image.Exif()
    exif[0x010F] = "scanner"
    path = save(tmp_path, "e.jpg", Image.new("L", (10, 10)), exif=exif)
    img = load_image(path)
    assert img.dpi is None and "no DPI" in img.dpi_note


def test_tiff_dpi_in_centimetres(tmp_path):
    path = save(
        tmp_path, "cm.tif", Image.new("L", (10, 10)), resolution_unit=3, x_resolution=118.11, y_resolution=118.11
    )
    img = load_image(path)
    # TIFF 6.0 ResolutionUnit 3 = centimetre; 118.11 px/cm * 2.54 = 299.9994 dpi,
    # within 5e-5 of 300.
    assert img.dpi == (300.0, 300.0)
    assert "per cm" in img.dpi_note and "read as 300" in img.dpi_note


def test_tiff_dpi_inch_and_no_unit(tmp_path):
    path = save(tmp_path, "i.tif", Image.new("L", (10, 10)), dpi=(1200, 1200))
    assert load_image(path).dpi == (1200.0, 1200.0)
    path = save(tmp_path, "n.tif", Image.new("L", (10, 10)), resolution_unit=1, x_resolution=3, y_resolution=3)
    img = load_image(path)
    assert img.dpi is None and "no unit" in img.dpi_note


def test_dpi_argument_wins(tmp_path):
    path = save(tmp_path, "d.png", Image.new("L", (10, 10)), dpi=(300, 300))
    img = load_image(path, dpi=600)
    assert img.dpi == (600.0, 600.0)
    assert "caller" in img.dpi_note and "11811" in img.dpi_note
    assert load_image(path, dpi=(600, 1200)).dpi == (600.0, 1200.0)


# The one DPI validator (scanmass.options.check_dpi) refuses these everywhere with one message.
DPI_MESSAGE = r"dpi must be a number of dots per inch from 1 to 100000, e\.g\. --dpi 600"


@pytest.mark.parametrize(
    "bad", [0, 0.5, -300, float("nan"), float("inf"), 1e6, "300", True, np.True_, (300,), (300, 0), [1, 2, 3]]
)
def test_bad_dpi_argument(tmp_path, bad):
    path = save(tmp_path, "d.png", Image.new("L", (10, 10)))
    expect_error(OptionError, None, DPI_MESSAGE, load_image, path, dpi=bad)
    expect_error(OptionError, None, DPI_MESSAGE, load_image, np.zeros((8, 8), np.uint8), dpi=bad)


# ---------------------------------------------------------------- tone curves


def test_srgb_lut_against_iec_formula():
    # IEC 61966-2-1 section 5.2: encoded 0.5 -> ((0.5 + 0.055) / 1.055) ** 2.4 = 0.21404;
    # the linear segment ends at 0.04045 -> 0.0031308.
    assert float(srgb_to_linear(0.5)) == pytest.approx(0.21404, abs=5e-6)
    assert float(srgb_to_linear(0.04045)) == pytest.approx(0.0031308, abs=1e-7)
    img = load_image(np.zeros((8, 8), np.uint8))
    codes = np.arange(256)
    np.testing.assert_allclose(img.to_linear, srgb_formula(codes / 255), rtol=0, atol=1e-7)
    assert img.to_linear[0] == 0.0 and img.to_linear[255] == pytest.approx(1.0, abs=1e-7)
    assert img.to_linear[10] == pytest.approx(10 / 255 / 12.92, rel=1e-6)


def test_srgb_lut_against_scikit_image():
    color = pytest.importorskip("skimage.color")
    codes = np.linspace(0, 1, 256)
    rgb = np.repeat(codes[:, None], 3, axis=1)[None]
    # Reference library: skimage's rgb2xyz linearises sRGB; for grey input
    # Y = R_lin * (0.2127 + 0.7152 + 0.0722) = R_lin.
    y_ref = color.rgb2xyz(rgb)[0, :, 1]
    lut = load_image(np.zeros((8, 8), np.uint8)).to_linear
    np.testing.assert_allclose(lut, y_ref, atol=2e-4)


def test_lut_sizes():
    assert load_image(np.zeros((8, 8), np.uint8)).to_linear.shape == (256,)
    assert load_image(np.zeros((8, 8), np.uint16)).to_linear.shape == (65536,)
    lut16 = load_image(np.zeros((8, 8), np.uint16)).to_linear
    np.testing.assert_allclose(lut16[32768], srgb_formula(32768 / 65535), atol=1e-7)


def _grey_png_with_profile(tmp_path, profile: bytes, name="p.png") -> Path:
    path = save(tmp_path, name, Image.fromarray(np.arange(64, dtype=np.uint8).reshape(8, 8)), icc_profile=profile)
    return path


def test_icc_curv_gamma_1_is_linear(tmp_path):
    profile = icc_profile(b"GRAY", {b"kTRC": curv([256])})  # u8Fixed8 1.0
    img = load_image(_grey_png_with_profile(tmp_path, profile))
    assert img.encoding == "linear (profile)"
    np.testing.assert_allclose(img.to_linear, np.arange(256) / 255, atol=1e-7)


def test_icc_curv_gamma_2_2(tmp_path):
    profile = icc_profile(b"GRAY", {b"kTRC": curv([563])})  # 563 / 256 = 2.1992 (u8Fixed8)
    img = load_image(_grey_png_with_profile(tmp_path, profile))
    assert img.encoding == "gamma 2.2 (profile)"
    np.testing.assert_allclose(img.to_linear, (np.arange(256) / 255) ** (563 / 256), atol=1e-6)


def test_icc_curv_empty_is_identity_and_table_is_interpolated(tmp_path):
    img = load_image(_grey_png_with_profile(tmp_path, icc_profile(b"GRAY", {b"kTRC": curv([])})))
    assert img.encoding == "linear (profile)"
    # ICC.1:2010 10.5: n entries sample [0, 1] evenly; values / 65535, linear between.
    table = [0, 8192, 65535]
    img = load_image(_grey_png_with_profile(tmp_path, icc_profile(b"GRAY", {b"kTRC": curv(table)}), "t.png"))
    x = np.arange(256) / 255
    expected = np.interp(x, [0, 0.5, 1], np.array(table) / 65535)
    np.testing.assert_allclose(img.to_linear, expected, atol=1e-6)
    assert "table of 3 points" in img.encoding


# ICC.1:2010 table 68, written out here:
#   0: Y = X^g
#   1: Y = (aX + b)^g for X >= -b/a, else 0
#   2: Y = (aX + b)^g + c for X >= -b/a, else c
#   3: Y = (aX + b)^g for X >= d, else cX
#   4: Y = (aX + b)^g + e for X >= d, else cX + f
def _para_reference(kind, p, x):
    out = np.empty_like(x)
    for i, v in enumerate(x):
        g = p[0]
        if kind == 0:
            out[i] = v**g
        elif kind == 1:
            a, b = p[1], p[2]
            out[i] = (a * v + b) ** g if v >= -b / a else 0.0
        elif kind == 2:
            a, b, c = p[1], p[2], p[3]
            out[i] = (a * v + b) ** g + c if v >= -b / a else c
        elif kind == 3:
            a, b, c, d = p[1:5]
            out[i] = (a * v + b) ** g if v >= d else c * v
        else:
            a, b, c, d, e, f = p[1:7]
            out[i] = (a * v + b) ** g + e if v >= d else c * v + f
    return np.clip(out, 0, 1)


def _s15(v):
    return round(v * 65536) / 65536  # what survives s15Fixed16 storage


@pytest.mark.parametrize(
    "kind, params",
    [
        (0, [1.8]),
        (1, [2.0, 1.1, -0.1]),
        (2, [2.0, 1.05, -0.05, 0.01]),
        (3, [2.4, 1 / 1.055, 0.055 / 1.055, 1 / 12.92, 0.04045]),  # sRGB (IEC 61966-2-1)
        (4, [2.2, 0.95, 0.05, 0.1, 0.05, 0.0, 0.002]),
    ],
)
def test_icc_parametric_curves(tmp_path, kind, params):
    profile = icc_profile(b"GRAY", {b"kTRC": para(kind, params)})
    img = load_image(_grey_png_with_profile(tmp_path, profile))
    x = np.arange(256) / 255
    expected = _para_reference(kind, [_s15(p) for p in params], x)
    np.testing.assert_allclose(img.to_linear, expected, atol=2e-6)
    if kind == 3:
        assert img.encoding == "sRGB (embedded profile)"


def test_icc_rgb_profile_uses_green_trc(tmp_path):
    profile = icc_profile(b"RGB ", {b"rTRC": curv([256]), b"gTRC": curv([461]), b"bTRC": curv([256])})
    path = save(tmp_path, "rgb.png", Image.fromarray(gradient_rgb()), icc_profile=profile)
    img = load_image(path)
    assert img.encoding == "gamma 1.8 (profile)"  # 461 / 256 = 1.8008
    np.testing.assert_allclose(img.to_linear, (np.arange(256) / 255) ** (461 / 256), atol=1e-6)


def test_icc_srgb_profile_from_littlecms(tmp_path):
    # Reference library: LittleCMS (via pillow.ImageCms) builds the sRGB profile.
    profile = ImageCms.ImageCmsProfile(ImageCms.createProfile("sRGB")).tobytes()
    for ext, kw in [("png", {}), ("jpg", {"quality": 95}), ("tif", {})]:
        path = save(tmp_path, f"s.{ext}", Image.fromarray(gradient_rgb()), icc_profile=profile, **kw)
        img = load_image(path)
        assert img.encoding == "sRGB (embedded profile)", ext
        np.testing.assert_allclose(img.to_linear, srgb_formula(np.arange(256) / 255), atol=2e-4)


def test_icc_lab_profile_falls_back_to_srgb(tmp_path):
    profile = ImageCms.ImageCmsProfile(ImageCms.createProfile("LAB")).tobytes()
    path = save(tmp_path, "lab.png", Image.fromarray(gradient_rgb()), icc_profile=profile)
    img = load_image(path)
    assert img.encoding.startswith("sRGB (assumed;")
    np.testing.assert_allclose(img.to_linear, srgb_formula(np.arange(256) / 255), atol=1e-7)


@pytest.mark.parametrize(
    "profile",
    [
        b"not a profile at all" * 10,
        icc_profile(b"GRAY", {b"wtpt": b"XYZ " + bytes(16)}),  # no tone curve
        icc_profile(b"GRAY", {b"kTRC": b"curv" + bytes(4) + struct.pack(">I", 1000)}),  # table past the end
        icc_profile(b"GRAY", {b"kTRC": para(9, [1.0])}),  # unknown function type
        icc_profile(b"GRAY", {b"kTRC": curv([65535, 0])}),  # decreasing
        icc_profile(b"GRAY", {b"kTRC": curv([0])}),  # gamma 0
    ],
)
def test_unusable_profile_falls_back_to_srgb(tmp_path, profile):
    img = load_image(_grey_png_with_profile(tmp_path, profile))
    assert img.encoding.startswith("sRGB (assumed; embedded profile unusable")
    np.testing.assert_allclose(img.to_linear, srgb_formula(np.arange(256) / 255), atol=1e-7)


def test_png_gama_1_is_linear(tmp_path):
    # W3C PNG specification 11.3.3.2: gAMA stores gamma * 100000; 100000 = linear.
    path = tmp_path / "lin.png"
    path.write_bytes(png_bytes(np.zeros((8, 8)), 0, chunks=[(b"gAMA", struct.pack(">I", 100000))]))
    img = load_image(path)
    assert img.encoding.startswith("linear")
    np.testing.assert_allclose(img.to_linear, np.arange(256) / 255, atol=1e-7)


def test_png_gama_16_bit_linear(tmp_path):
    path = tmp_path / "lin16.png"
    path.write_bytes(png_bytes(np.zeros((8, 8)), 0, 16, chunks=[(b"gAMA", struct.pack(">I", 100000))]))
    img = load_image(path)
    assert img.to_linear.shape == (65536,)
    assert img.to_linear[32768] == pytest.approx(32768 / 65535, abs=1e-7)


def test_png_gama_045455_is_power_2_2(tmp_path):
    path = tmp_path / "g.png"
    path.write_bytes(png_bytes(np.zeros((8, 8)), 0, chunks=[(b"gAMA", struct.pack(">I", 45455))]))
    img = load_image(path)
    # PNG 12.2: linear = encoded ** (1 / gamma) = encoded ** 2.19998.
    np.testing.assert_allclose(img.to_linear, (np.arange(256) / 255) ** (1 / 0.45455), atol=1e-6)
    assert img.encoding.startswith("gamma 2.2")


def test_png_srgb_chunk_beats_gama_and_iccp_beats_both(tmp_path):
    chunks = [(b"sRGB", b"\x00"), (b"gAMA", struct.pack(">I", 100000))]
    path = tmp_path / "s.png"
    path.write_bytes(png_bytes(np.zeros((8, 8)), 0, chunks=chunks))
    assert load_image(path).encoding == "sRGB (PNG sRGB chunk)"
    profile = icc_profile(b"GRAY", {b"kTRC": curv([256])})
    chunks = [(b"iCCP", b"grey\x00\x00" + zlib.compress(profile)), (b"gAMA", struct.pack(">I", 45455))]
    path.write_bytes(png_bytes(np.zeros((8, 8)), 0, chunks=chunks))
    assert load_image(path).encoding == "linear (profile)"


def test_grey16_with_gamma_profile(tmp_path):
    profile = icc_profile(b"GRAY", {b"kTRC": curv([563])})
    path = save(tmp_path, "g16.tif", Image.fromarray(np.zeros((8, 8), np.uint16)), tiffinfo={34675: profile})
    img = load_image(path)
    assert img.to_linear.shape == (65536,)
    assert img.encoding == "gamma 2.2 (profile)"
    assert img.to_linear[32768] == pytest.approx((32768 / 65535) ** (563 / 256), abs=1e-6)


def test_linear_crop():
    grey = (np.arange(100, dtype=np.uint8).reshape(10, 10) * 2).astype(np.uint8)
    img = load_image(grey)
    crop = img.linear(slice(2, 5), slice(3, 9))
    assert crop.shape == (3, 6) and crop.dtype == np.float32
    np.testing.assert_allclose(crop, srgb_formula(grey[2:5, 3:9] / 255), atol=1e-7)


# --------------------------------------------------------------------- arrays


def test_array_uint8_grey_is_copied():
    grey = RNG.integers(0, 256, (10, 12), dtype=np.uint8)
    img = load_image(grey)
    np.testing.assert_array_equal(img.grey, grey)
    assert not np.shares_memory(img.grey, grey)
    assert (img.path, img.sha256, img.format, img.orientation) == (None, None, None, 1)
    assert img.encoding == "sRGB (assumed)"
    assert img.dpi is None and "dpi=" in img.dpi_note
    assert load_image(grey, dpi=400).dpi == (400.0, 400.0)


def test_array_rgb8_matches_pillow():
    rgb = RNG.integers(0, 256, (16, 20, 3), dtype=np.uint8)
    img = load_image(rgb)
    np.testing.assert_array_equal(img.grey, np.asarray(Image.fromarray(rgb).convert("L")))


def test_array_rgba8_and_la8():
    rgba = RNG.integers(0, 256, (16, 20, 4), dtype=np.uint8)
    alpha = rgba[..., 3] / 255
    expected = luma601(rgba) * alpha + 255 * (1 - alpha)
    assert np.max(np.abs(load_image(rgba).grey - expected)) <= 1.0
    la = rgba[..., [0, 3]]
    expected = la[..., 0] * alpha + 255 * (1 - alpha)
    assert np.max(np.abs(load_image(la).grey - expected)) <= 0.5 + 1e-6


def test_array_uint16_rgb_noncontiguous_big_endian():
    rgb = RNG.integers(0, 65536, (20, 24, 3), dtype=np.uint16).astype(">u2")[::2, ::2]
    img = load_image(rgb)
    assert img.grey.dtype == np.uint16 and img.grey.flags.c_contiguous
    assert np.max(np.abs(img.grey - luma601(rgb))) <= 0.5 + 1e-3
    assert img.to_linear.shape == (65536,)


def test_array_single_channel():
    grey = RNG.integers(0, 256, (9, 9, 1), dtype=np.uint8)
    np.testing.assert_array_equal(load_image(grey).grey, grey[..., 0])


@pytest.mark.parametrize("dtype", [np.float16, np.float32, np.float64])
def test_array_float_is_linear(dtype):
    values = RNG.random((10, 12)).astype(dtype)
    img = load_image(values)
    assert img.encoding == "linear (array)" and img.grey.dtype == np.uint16
    np.testing.assert_array_equal(img.grey, np.rint(values.astype(np.float32) * np.float32(65535)).astype(np.uint16))
    np.testing.assert_allclose(img.linear(), values.astype(np.float64), atol=0.5 / 65535 + 1e-7)


def test_array_float_rgb_luminance():
    rgb = RNG.random((10, 12, 3))
    img = load_image(rgb)
    np.testing.assert_allclose(img.linear(), luma601(rgb), atol=1e-4)


def test_array_bool():
    mask = np.zeros((10, 10), bool)
    mask[2:5, 3:7] = True
    img = load_image(mask)
    np.testing.assert_array_equal(img.linear(), mask.astype(np.float32))
    assert img.bit_depth == 1


@pytest.mark.parametrize(
    "arr, match",
    [
        (np.zeros((10, 10), np.int32), "unsupported dtype"),
        (np.zeros((10, 10), np.complex64), "unsupported dtype"),
        (np.zeros((10, 10), object), "unsupported dtype"),
        (np.zeros(100, np.uint8), "unsupported shape"),
        (np.zeros((10, 10, 3, 1), np.uint8), "unsupported shape"),
        (np.zeros((10, 10, 5), np.uint8), "unsupported shape"),
        (np.zeros((10, 10, 3), bool), "one channel"),
        (np.full((10, 10), 1.5), r"\[0, 1\]"),
        (np.full((10, 10), np.nan), "NaN"),
        (np.zeros((7, 100), np.uint8), "only 100 x 7 px"),
    ],
)
def test_array_errors(arr, match):
    expect_error(ImageError, None, match, load_image, arr)


def test_array_too_large():
    expect_error(ImageError, None, "--max-pixels N", load_image, np.zeros((100, 100), np.uint8), max_pixels=9999)


# --------------------------------------------------------------------- errors


def test_missing_file(tmp_path):
    path = tmp_path / "nope.png"
    expect_error(ImageError, path, "file not found", load_image, path)
    expect_error(ImageError, path, "file not found", read_dpi, path)


def test_directory(tmp_path):
    expect_error(ImageError, tmp_path, "is a folder", load_image, tmp_path)


def test_empty_file(tmp_path):
    path = tmp_path / "empty.png"
    path.write_bytes(b"")
    expect_error(ImageError, path, r"empty \(0 bytes\)", load_image, path)


def test_text_named_png(tmp_path):
    path = tmp_path / "notes.png"
    path.write_text("measure the bracket tomorrow\n")
    expect_error(ImageError, path, "is not a JPEG, PNG or TIFF image", load_image, path)


def test_other_format_is_named(tmp_path):
    path = save(tmp_path, "anim.png", Image.new("L", (10, 10)), format="GIF")
    expect_error(ImageError, path, "is a GIF file", load_image, path)


@pytest.mark.parametrize("ext, kw", [("png", {}), ("jpg", {"quality": 90}), ("tif", {})])
@pytest.mark.parametrize("fraction", [0.5, 0.9])
def test_truncated_files(tmp_path, ext, kw, fraction):
    full = save(tmp_path, f"full.{ext}", Image.fromarray(RNG.integers(0, 256, (80, 100, 3), dtype=np.uint8)), **kw)
    data = full.read_bytes()
    path = tmp_path / f"cut.{ext}"
    path.write_bytes(data[: int(len(data) * fraction)])
    expect_error(ImageError, path, "truncated or damaged|cannot be decoded", load_image, path)


def test_truncated_16bit_colour_png(tmp_path):
    data = png_bytes(RNG.integers(0, 65536, (40, 50, 3), dtype=np.uint16), 2, 16)
    path = tmp_path / "cut16.png"
    path.write_bytes(data[: len(data) // 2])
    expect_error(ImageError, path, "truncated or damaged", load_image, path)


def test_header_only_png(tmp_path):
    path = tmp_path / "head.png"
    path.write_bytes(png_bytes(np.zeros((10, 10)), 0)[:40])
    expect_error(ImageError, path, "truncated or damaged|cannot be decoded", load_image, path)


def test_too_small(tmp_path):
    path = save(tmp_path, "tiny.png", Image.new("L", (20, 7)))
    expect_error(ImageError, path, "only 20 x 7 px", load_image, path)


def test_too_large_names_limit_and_override(tmp_path):
    path = save(tmp_path, "big.png", Image.new("L", (100, 100)))
    message = expect_error(ImageError, path, "over the limit of 9999 px", load_image, path, max_pixels=9999)
    assert "--max-pixels N" in message


def test_too_large_checked_from_header_before_decoding(tmp_path):
    # A 30000 x 30000 header (900 MP) with no pixel data behind it: the size error
    # must come first (and not pillow's own decompression-bomb error).
    path = tmp_path / "bomb.png"
    path.write_bytes(png_bytes(np.zeros((0, 0)), 0, size=(30000, 30000)))
    message = expect_error(ImageError, path, f"over the limit of {DEFAULT_MAX_PIXELS} px", load_image, path)
    assert "30000 x 30000" in message


@pytest.mark.parametrize("ext", ["png", "tif", "jpg"])
def test_pillow_guard_does_not_preempt_ours(tmp_path, monkeypatch, ext):
    path = save(tmp_path, f"ok.{ext}", Image.fromarray(RNG.integers(0, 256, (64, 64), dtype=np.uint8)))
    monkeypatch.setattr(Image, "MAX_IMAGE_PIXELS", 1000)  # pillow's guard far stricter than ours
    img = load_image(path)
    assert img.grey.shape == (64, 64)
    assert Image.MAX_IMAGE_PIXELS == 1000  # restored, not left lifted


@pytest.mark.parametrize("bad", [0, -1, 1.5, True, "100"])
def test_bad_max_pixels(tmp_path, bad):
    path = save(tmp_path, "d.png", Image.new("L", (10, 10)))
    expect_error(OptionError, None, "max_pixels must be a positive whole number", load_image, path, max_pixels=bad)


def test_unsupported_mode(tmp_path):
    path = save(tmp_path, "lab.tif", Image.new("LAB", (10, 10)))
    expect_error(ImageError, path, "unsupported pixel format LAB", load_image, path)


def test_int32_out_of_range(tmp_path):
    path = save(tmp_path, "i.tif", Image.fromarray(np.full((10, 10), 70000, np.int32)))
    expect_error(ImageError, path, "outside 0..65535", load_image, path)


def test_float_tiff_out_of_range(tmp_path):
    path = save(tmp_path, "f.tif", Image.fromarray(np.full((10, 10), 3.0, np.float32)))
    expect_error(ImageError, path, r"\[0, 1\]", load_image, path)


def test_wrong_source_type():
    expect_error(OptionError, None, "file path or a numpy array", load_image, b"\x89PNG")


def test_unreadable_file(tmp_path):
    import os

    if os.geteuid() == 0:
        pytest.skip("root reads any file")
    path = save(tmp_path, "locked.png", Image.new("L", (10, 10)))
    path.chmod(0)
    try:
        expect_error(ImageError, path, "cannot be read", load_image, path)
    finally:
        path.chmod(0o600)


# --------------------------------------------------------------------- memory


def test_memory_is_grey_sized(tmp_path):
    """No full-size float or colour arrays: Python-side peak is about the grey plane."""
    import tracemalloc

    rgb = gradient_rgb(1000, 1500)
    path = save(tmp_path, "m.png", Image.fromarray(rgb))
    file_bytes = path.stat().st_size
    grey_bytes = 1000 * 1500
    tracemalloc.start()
    try:
        img = load_image(path)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert img.grey.nbytes == grey_bytes
    # Allowed: the file bytes, the grey plane and a band of temporaries (a quarter
    # megapixel); one float32 plane alone would be 4 x grey (6 MB).
    assert peak < file_bytes + grey_bytes + 4 * 2**20


# ------------------------------------------------- orientation x decoder paths


@pytest.mark.parametrize("compression", [None, "tiff_lzw", "tiff_adobe_deflate"])
@pytest.mark.parametrize("orientation", [3, 6, 8])
def test_tiff_orientation_applied_once_on_every_decoder(tmp_path, compression, orientation):
    # Pillow's raw and libtiff paths differ, and recent pillow applies the TIFF
    # orientation itself; the result must still equal one exif_transpose.
    grey = RNG.integers(0, 256, (12, 20), dtype=np.uint8)
    path = save(tmp_path, "o.tif", Image.fromarray(grey), compression=compression, tiffinfo={274: orientation})
    img = load_image(path)
    expected = {3: np.rot90(grey, 2), 6: np.rot90(grey, -1), 8: np.rot90(grey, 1)}[orientation]
    np.testing.assert_array_equal(img.grey, expected)
    assert img.orientation == orientation


@pytest.mark.parametrize("orientation", [3, 6])
def test_rgb16_png_orientation(tmp_path, orientation):
    rgb = np.full((10, 14, 3), 40000, np.uint16)
    rgb[0, 0] = 0
    exif = Image.Exif()
    exif[0x0112] = orientation
    payload = exif.tobytes()
    payload = payload[6:] if payload.startswith(b"Exif\x00\x00") else payload
    path = tmp_path / "o16.png"
    path.write_bytes(png_bytes(rgb, 2, 16, chunks=[(b"eXIf", payload)]))
    img = load_image(path)
    assert img.grey.dtype == np.uint16 and img.orientation == orientation
    if orientation == 3:
        assert img.grey.shape == (10, 14) and img.grey[-1, -1] == 0
    else:
        assert img.grey.shape == (14, 10) and img.grey[0, -1] == 0


def test_rgb16_tiff_orientation_3_and_planar(tmp_path):
    tifffile = pytest.importorskip("tifffile")
    rgb = np.full((10, 14, 3), 40000, np.uint16)
    rgb[0, 0] = 0
    path = tmp_path / "p16.tif"
    tifffile.imwrite(
        path, np.moveaxis(rgb, -1, 0), photometric="rgb", planarconfig="separate", extratags=[(274, "H", 1, 3, True)]
    )
    img = load_image(path)
    assert img.grey.shape == (10, 14) and img.grey[-1, -1] == 0 and img.grey[0, 0] == 40000


def test_rgba16_tiff_associated_alpha(tmp_path):
    tifffile = pytest.importorskip("tifffile")
    rgba = np.zeros((8, 8, 4), np.uint16)
    rgba[..., :3] = 20000  # premultiplied colour
    rgba[..., 3] = 40000
    path = tmp_path / "a16.tif"
    tifffile.imwrite(path, rgba, photometric="rgb", extrasamples=[1])
    img = load_image(path)
    # Porter & Duff "over" with premultiplied colour: C + white x (1 - alpha).
    assert np.all(img.grey == 20000 + 65535 - 40000)


def test_png_exif_after_image_data(tmp_path):
    grey = np.zeros((10, 14), np.uint8)
    grey[0, 0] = 255
    exif = Image.Exif()
    exif[0x0112] = 8
    payload = exif.tobytes()
    payload = payload[6:] if payload.startswith(b"Exif\x00\x00") else payload
    data = png_bytes(grey, 0)
    iend = png_chunk(b"IEND", b"")
    path = tmp_path / "late.png"
    path.write_bytes(data[: -len(iend)] + png_chunk(b"eXIf", payload) + iend)
    img = load_image(path)
    expected = np.asarray(ImageOps.exif_transpose(opened(path)))
    np.testing.assert_array_equal(img.grey, expected)
    assert img.orientation == 8 and img.grey[-1, 0] == 255
