"""Property tests of scanmass.load.decode: whatever comes in, the result is a LoadedImage
or a ScanmassError with a one-line message -- never another exception.

Inputs: random bytes under image names, truncations and byte flips of valid files,
random numpy arrays of any dtype and shape, random option values.
"""

from __future__ import annotations

import io
import struct
import zlib

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from hypothesis.extra import numpy as hnp
from PIL import Image, ImageCms

from scanmass.errors import ScanmassError
from scanmass.load.decode import LoadedImage, load_image

FUZZ = settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.too_slow])

# Keeps a mutated header from making pillow allocate hundreds of megabytes; the
# size guard itself is tested in test_load.py.
SMALL_LIMIT = 1 << 20


def _png_chunk(kind: bytes, payload: bytes) -> bytes:
    return struct.pack(">I", len(payload)) + kind + payload + struct.pack(">I", zlib.crc32(kind + payload))


def _png16_rgb(arr: np.ndarray) -> bytes:
    height, width = arr.shape[:2]
    raw = b"".join(b"\x00" + row.tobytes() for row in arr.astype(">u2").reshape(height, -1))
    ihdr = struct.pack(">IIBBBBB", width, height, 16, 2, 0, 0, 0)
    return (
        b"\x89PNG\r\n\x1a\n"
        + _png_chunk(b"IHDR", ihdr)
        + _png_chunk(b"IDAT", zlib.compress(raw))
        + _png_chunk(b"IEND", b"")
    )


def _encode(image: Image.Image, fmt: str, **kw) -> bytes:
    buf = io.BytesIO()
    image.save(buf, fmt, **kw)
    return buf.getvalue()


def _valid_files() -> dict[str, bytes]:
    rng = np.random.default_rng(7)
    rgb = rng.integers(0, 256, (24, 32, 3), dtype=np.uint8)
    exif = Image.Exif()
    exif[0x0112] = 6
    exif[0x011A] = 300
    exif[0x011B] = 300
    exif[0x0128] = 2
    srgb = ImageCms.ImageCmsProfile(ImageCms.createProfile("sRGB")).tobytes()
    files = {
        "l.png": _encode(Image.fromarray(rgb[..., 0]), "PNG", dpi=(300, 300)),
        "rgb.png": _encode(Image.fromarray(rgb), "PNG", icc_profile=srgb),
        "rgba.png": _encode(Image.fromarray(np.dstack([rgb, rgb[..., :1]]), "RGBA"), "PNG"),
        "p.png": _encode(Image.fromarray(rgb).quantize(8), "PNG"),
        "g16.png": _encode(Image.fromarray(rgb[..., 0].astype(np.uint16) * 257), "PNG"),
        "c16.png": _png16_rgb(rgb.astype(np.uint16) * 257),
        "rgb.jpg": _encode(Image.fromarray(rgb), "JPEG", exif=exif, quality=90),
        "cmyk.jpg": _encode(Image.fromarray(rgb).convert("CMYK"), "JPEG"),
        "raw.tif": _encode(Image.fromarray(rgb), "TIFF", dpi=(600, 600)),
        "lzw.tif": _encode(Image.fromarray(rgb[..., 1]), "TIFF", compression="tiff_lzw", tiffinfo={274: 3}),
        "bits.tif": _encode(Image.fromarray(rgb[..., 2] > 128), "TIFF"),
    }
    try:
        import tifffile

        buf = io.BytesIO()
        tifffile.imwrite(buf, rgb.astype(np.uint16) * 257, photometric="rgb")
        files["c16.tif"] = buf.getvalue()
    except ImportError:  # pragma: no cover
        pass
    return files


VALID = _valid_files()
NAMES = sorted(VALID)


@pytest.fixture(scope="module")
def fuzz_dir(tmp_path_factory):
    return tmp_path_factory.mktemp("fuzz")


def _check_result(call):
    """Run ``call``; accept a sane LoadedImage or a one-line ScanmassError."""
    try:
        result = call()
    except ScanmassError as exc:
        assert "\n" not in str(exc)
        assert str(exc)
        return None
    assert isinstance(result, LoadedImage)
    assert result.grey.ndim == 2 and result.grey.flags.c_contiguous
    assert result.grey.dtype in (np.uint8, np.uint16)
    assert result.to_linear.dtype == np.float32
    assert result.to_linear.shape == ((256,) if result.grey.dtype == np.uint8 else (65536,))
    assert np.all(np.isfinite(result.to_linear))
    assert result.to_linear.min() >= 0.0 and result.to_linear.max() <= 1.0
    assert (result.height_px, result.width_px) == result.grey.shape
    assert result.dpi is None or all(np.isfinite(result.dpi)) and min(result.dpi) > 0
    return result


def test_valid_files_load(fuzz_dir):
    for name in NAMES:
        path = fuzz_dir / name
        path.write_bytes(VALID[name])
        assert _check_result(lambda: load_image(path)) is not None, name


MAGIC = [b"", b"\x89PNG\r\n\x1a\n", b"\xff\xd8\xff\xe0", b"II*\x00", b"MM\x00*"]


@FUZZ
@given(
    magic=st.sampled_from(MAGIC),
    body=st.binary(max_size=2048),
    ext=st.sampled_from([".png", ".jpg", ".tif"]),
)
def test_random_bytes(fuzz_dir, magic, body, ext):
    path = fuzz_dir / f"random{ext}"
    path.write_bytes(magic + body)
    _check_result(lambda: load_image(path, max_pixels=SMALL_LIMIT))


@FUZZ
@given(name=st.sampled_from(NAMES), fraction=st.floats(0.0, 1.0))
def test_truncated_valid_files(fuzz_dir, name, fraction):
    data = VALID[name]
    path = fuzz_dir / f"cut_{name}"
    path.write_bytes(data[: int(len(data) * fraction)])
    _check_result(lambda: load_image(path, max_pixels=SMALL_LIMIT))


@FUZZ
@given(
    name=st.sampled_from(NAMES),
    flips=st.lists(st.tuples(st.integers(0, 1 << 20), st.integers(0, 255)), min_size=1, max_size=6),
)
def test_mutated_valid_files(fuzz_dir, name, flips):
    data = bytearray(VALID[name])
    for offset, value in flips:
        data[offset % min(len(data), 600)] = value  # headers live in the first bytes
    path = fuzz_dir / f"flip_{name}"
    path.write_bytes(bytes(data))
    _check_result(lambda: load_image(path, max_pixels=SMALL_LIMIT))


DTYPES = st.one_of(
    hnp.unsigned_integer_dtypes(),
    hnp.integer_dtypes(),
    hnp.floating_dtypes(),
    hnp.boolean_dtypes(),
    hnp.complex_number_dtypes(),
    hnp.byte_string_dtypes(max_len=2),
    hnp.datetime64_dtypes(),
)


@pytest.mark.slow
@FUZZ
@given(
    arr=hnp.arrays(dtype=DTYPES, shape=hnp.array_shapes(min_dims=0, max_dims=4, min_side=0, max_side=14)),
    dpi=st.one_of(st.none(), st.floats(1.0, 5000.0)),
)
def test_random_arrays(arr, dpi):
    _check_result(lambda: load_image(arr, dpi=dpi))


@pytest.mark.slow
@FUZZ
@given(
    arr=hnp.arrays(
        dtype=st.sampled_from([np.uint8, np.uint16, np.float32, np.float64, np.bool_]),
        shape=st.tuples(st.integers(8, 16), st.integers(8, 16), st.sampled_from([1, 2, 3, 4])),
    )
)
def test_random_image_like_arrays(arr):
    # Mostly valid shapes, so the conversion paths themselves get exercised.
    result = _check_result(lambda: load_image(arr))
    if result is not None and arr.dtype.kind == "f":
        assert np.all(result.linear() >= 0.0)


ODD_VALUES = st.one_of(
    st.none(),
    st.booleans(),
    st.integers(-(10**6), 10**12),
    st.floats(allow_nan=True, allow_infinity=True),
    st.text(max_size=4),
    st.tuples(st.floats(allow_nan=True), st.floats(allow_nan=True)),
    st.lists(st.integers(-5, 5000), max_size=3),
)


@FUZZ
@given(dpi=ODD_VALUES, max_pixels=ODD_VALUES)
def test_random_options(fuzz_dir, dpi, max_pixels):
    path = fuzz_dir / "opt.png"
    if not path.exists():
        path.write_bytes(VALID["l.png"])
    kwargs = {"dpi": dpi}
    if max_pixels is not None:
        kwargs["max_pixels"] = max_pixels
    result = _check_result(lambda: load_image(path, **kwargs))
    if result is not None and dpi is not None:
        assert result.dpi is not None
