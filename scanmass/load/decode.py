"""Read a scan or photo into a grey plane, a tone curve to linear light, and its DPI.

The first stage of the pipeline. :func:`load_image` decodes JPEG, PNG and TIFF files
(8 and 16 bits per sample, greyscale, RGB, palette, CMYK, bilevel, with or without
alpha) or takes a numpy array, and returns a :class:`LoadedImage`:

* ``grey`` -- the encoded grey values as stored (uint8 or uint16), after the EXIF
  orientation has been applied. Colour images are reduced to the luma of their
  encoded channels; transparent pixels are composited over white.
* ``to_linear`` -- a lookup table from an encoded grey value to linear light in
  [0, 1]: the sRGB curve unless the file says otherwise (an embedded ICC profile's
  grey or green tone curve, a PNG ``sRGB`` or ``gAMA`` chunk).
* ``dpi`` -- the resolution stored in the file (or given by the caller), ``None`` when
  it is missing or is one of the 72/96 defaults that software writes when it does
  not know.

Thresholds belong on linear light, not on encoded values (see DESIGN.md, "Pitfalls"):
``LoadedImage.linear`` applies the table to a crop.

The loader reads the file once, hashes it, checks the pixel count from the header
before decoding anything, and never builds full-size float arrays.
"""

from __future__ import annotations

import contextlib
import hashlib
import io
import math
import numbers
import os
import re
import struct
import sys
import tempfile
import threading
import warnings
import zlib
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from PIL import Image, ImageFile, UnidentifiedImageError

from scanmass.errors import ImageError, OptionError
from scanmass.options import DEFAULT_MAX_PIXELS, MAX_DPI, MIN_DPI, check_dpi, check_max_pixels
from scanmass.readfile import display_path, read_regular

__all__ = [
    "DEFAULT_MAX_PIXELS",
    "UNKNOWN_DPI_VALUES",
    "LoadedImage",
    "load_image",
    "read_dpi",
    "srgb_to_linear",
    "encoding_lut",
    "lookup",
]

#: Resolutions that image software writes when it does not know the real one
#: (common practice: 72 dpi from early Macintosh displays, 96 dpi from Windows).
UNKNOWN_DPI_VALUES = (72.0, 96.0)

#: A resolution stored in a file below this (dpi) is taken as junk, not a measurement
#: (common practice: flatbed scanners start at 75 dpi; photos carry 72/96 defaults).
MIN_PLAUSIBLE_FILE_DPI = 50.0

#: A stored resolution whose x and y differ by more than this fraction is taken as junk:
#: flatbed scanners scan square pixels (common practice).
MAX_FILE_DPI_ANISOTROPY = 0.01

#: Memory budget of one decode, in bytes per pixel allowed by ``max_pixels``: a file may
#: decode to ``4 * max_pixels`` bytes (1 GB at the default), whatever its pixel count.
BUDGET_BYTES_PER_PIXEL = 4

#: Smallest accepted image side, in pixels.
MIN_SIDE_PX = 8

# Pillow plugins we let near the bytes (MPO, the multi-picture JPEG that many phones
# write, comes in through the JPEG plugin).
_PIL_FORMATS = ("JPEG", "PNG", "TIFF")
_FORMAT_NAMES = "JPEG, PNG or TIFF"

# Relative tolerance within which a stored resolution is read as a whole number of
# dpi (the rounding of a whole number of pixels per metre at 300 dpi and above).
_DPI_ROUND_RTOL = 5e-5

# Luma weights of ITU-R BT.601 in 16-bit fixed point, the same integers pillow uses
# for RGB -> L, so 8-bit arrays are reduced exactly like 8-bit files.
_LUMA_R, _LUMA_G, _LUMA_B = 19595, 38470, 7471

# Pixels per band of rows when converting, so temporaries stay at a few megabytes.
_BAND_PIXELS = 1 << 18

# Serialises the rare decode that has to lift pillow's own pixel guard (see
# _pillow_guard_lifted); pillow keeps that limit in a module attribute.
_PIL_GUARD_LOCK = threading.Lock()

# Serialises the redirection of file descriptor 2 (see _captured_stderr).
_STDERR_LOCK = threading.Lock()


# --------------------------------------------------------------------------- result


@dataclass(eq=False)
class LoadedImage:
    """A decoded image: encoded grey plane, tone curve, resolution and provenance.

    Attributes
    ----------
    grey : ndarray of uint8 or uint16, shape (height_px, width_px)
        Encoded grey values as stored, after the EXIF orientation; C-contiguous.
    to_linear : ndarray of float32, shape (256,) or (65536,)
        Encoded grey value -> linear light in [0, 1].
    dpi : tuple of float (x, y) or None
        Resolution in dots per inch, ``None`` when missing or a 72/96 default.
    dpi_note : str
        What was found about the resolution and what was made of it.
    encoding : str
        The tone curve used, and where it came from, e.g. ``"sRGB (assumed)"``.
    path, sha256, format, mode : str or None
        File path, SHA-256 of the file bytes, pillow format and mode of the file.
    bit_depth : int
        Bits per sample of the source (1, 8, 16; 32 or 64 for float sources).
    orientation : int
        EXIF orientation value that was applied (1 = none).
    width_px, height_px : int
        Size of ``grey`` (after orientation).
    """

    grey: np.ndarray = field(repr=False)
    to_linear: np.ndarray = field(repr=False)
    dpi: tuple[float, float] | None
    dpi_note: str
    encoding: str
    path: str | None
    sha256: str | None
    format: str | None
    mode: str | None
    bit_depth: int
    orientation: int
    width_px: int
    height_px: int

    def linear(self, rows: slice = slice(None), cols: slice = slice(None)) -> np.ndarray:
        """Linear light of a crop of the grey plane.

        Parameters
        ----------
        rows, cols : slice
            The crop, in pixel rows and columns of ``grey``.

        Returns
        -------
        ndarray of float32
            ``to_linear[grey[rows, cols]]``, values in [0, 1].
        """
        return lookup(self.to_linear, self.grey[rows, cols])


def lookup(table: np.ndarray, codes: np.ndarray) -> np.ndarray:
    """``table[codes]``: a lookup table applied to an array of integer codes (the same array).

    For 8-bit codes and a 256-entry table it is OpenCV's table lookup, several times
    faster on large crops than numpy's indexing (which first widens every code to a
    64-bit index); the values are the table's own, so the result is identical.

    Examples
    --------
    >>> lookup(np.array([0.0, 0.5, 1.0] + [1.0] * 253, np.float32), np.array([[2, 1], [0, 1]], np.uint8)).tolist()
    [[1.0, 0.5], [0.0, 0.5]]
    """
    table = np.asarray(table)
    if (
        codes.dtype == np.uint8
        and codes.ndim == 2
        and codes.size
        and table.shape == (256,)
        and table.dtype in (np.float32, np.float64, np.uint8)
    ):
        import cv2

        return cv2.LUT(codes, np.ascontiguousarray(table))
    return table[codes]


# ------------------------------------------------------------------ tone curves


def srgb_to_linear(encoded: np.ndarray) -> np.ndarray:
    """The sRGB decoding curve: encoded value in [0, 1] -> linear light in [0, 1].

    Parameters
    ----------
    encoded : array_like of float
        Encoded (non-linear) values in [0, 1].

    Returns
    -------
    ndarray of float64
        Linear light.

    References
    ----------
    .. [1] IEC 61966-2-1:1999, Multimedia systems and equipment -- Colour measurement
       and management -- Part 2-1: Default RGB colour space -- sRGB, section 5.2.

    Examples
    --------
    >>> float(srgb_to_linear(0.5))
    0.21404
    """
    c = np.asarray(encoded, dtype=np.float64)
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def _samples(levels: int) -> np.ndarray:
    return np.arange(levels, dtype=np.float64) / (levels - 1)


def _lut_srgb(levels: int) -> np.ndarray:
    return srgb_to_linear(_samples(levels)).astype(np.float32)


def _lut_identity(levels: int) -> np.ndarray:
    return _samples(levels).astype(np.float32)


def _lut_power(levels: int, gamma: float) -> np.ndarray:
    return (_samples(levels) ** gamma).astype(np.float32)


def encoding_lut(kind: str, levels: int, gamma: float | None = None) -> tuple[np.ndarray, str]:
    """The tone curve (encoded -> linear light) of a named encoding, and its label.

    Parameters
    ----------
    kind : {"srgb", "linear", "gamma"}
        The encoding (see :func:`scanmass.options.check_encoding`).
    levels : int
        256 or 65536 entries.
    gamma : float, optional
        For ``"gamma"``: linear = encoded ** gamma.

    Examples
    --------
    >>> lut, label = encoding_lut("gamma", 256, 2.2)
    >>> label, round(float(lut[128]), 4)
    ('gamma 2.2 (given)', 0.2195)
    """
    if kind == "srgb":
        return _lut_srgb(levels), "sRGB (given)"
    if kind == "linear":
        return _lut_identity(levels), "linear (given)"
    if kind == "gamma" and gamma is not None:
        return _lut_power(levels, gamma), f"gamma {gamma:.3g} (given)"
    raise ValueError(f"unknown encoding {kind!r}")


class _ProfileError(ValueError):
    """An embedded ICC profile whose tone curve cannot be used."""


# Number of parameters of each ICC parametricCurveType function.
_PARA_COUNTS = {0: 1, 1: 3, 2: 4, 3: 5, 4: 7}


def _parametric_curve(kind: int, p: list[float], x: np.ndarray) -> np.ndarray:
    """Evaluate an ICC ``para`` function (ICC.1:2010 table 68) at ``x`` in [0, 1]."""
    g = p[0]
    if kind == 0:
        return x**g
    a, b = p[1], p[2]
    base = np.maximum(a * x + b, 0.0)
    if kind in (1, 2):
        c = p[3] if kind == 2 else 0.0
        if a == 0:
            raise _ProfileError("parametric curve with a = 0")
        return np.where(x >= -b / a, base**g + c, c)
    c, d = p[3], p[4]
    e, f = (p[5], p[6]) if kind == 4 else (0.0, 0.0)
    return np.where(x >= d, base**g + e, c * x + f)


def _icc_tone_curve(profile: bytes, levels: int, expected_space: bytes = b"") -> tuple[np.ndarray, str]:
    """Tone curve (encoded -> linear) of an ICC profile's grey or green TRC tag.

    Parameters
    ----------
    profile : bytes
        The embedded ICC profile.
    levels : int
        256 or 65536.
    expected_space : bytes
        The ICC colour space the decoded grey values come from (b"GRAY", b"RGB "),
        or b"" for any.

    Returns
    -------
    lut : ndarray of float32, shape (levels,)
    encoding : str

    Raises
    ------
    _ProfileError
        The profile has no usable ``kTRC``/``gTRC`` tag.

    References
    ----------
    .. [1] ICC.1:2010 (ISO 15076-1:2010), Image technology colour management --
       Architecture, profile format and data structure, sections 7.2 (header), 7.3
       (tag table), 10.5 (curveType) and 10.15 (parametricCurveType).
    """
    n = len(profile)
    if n < 132 or profile[36:40] != b"acsp":
        raise _ProfileError("not an ICC profile")
    space = profile[16:20]
    if space not in (b"GRAY", b"RGB ") or (expected_space and space != expected_space):
        raise _ProfileError(f"a {space.decode('latin-1').strip() or 'blank'} profile does not fit these pixels")
    (count,) = struct.unpack_from(">I", profile, 128)
    if count > (n - 132) // 12:
        raise _ProfileError("tag table runs past the end")
    tags: dict[bytes, tuple[int, int]] = {}
    for i in range(count):
        sig, offset, size = struct.unpack_from(">4sII", profile, 132 + 12 * i)
        tags.setdefault(sig, (offset, size))
    entry = tags.get(b"kTRC") or tags.get(b"gTRC")
    if entry is None:
        raise _ProfileError("no grey or green tone curve (kTRC/gTRC) tag")
    offset, size = entry
    if size < 12 or offset + size > n:
        raise _ProfileError("tone curve tag runs past the end")
    tag = profile[offset : offset + size]
    kind = tag[:4]
    x = _samples(levels)
    if kind == b"curv":
        (entries,) = struct.unpack_from(">I", tag, 8)
        if 12 + 2 * entries > size:
            raise _ProfileError("curve table runs past the end")
        if entries == 0:
            y, label = x, "linear (profile)"
        elif entries == 1:
            (raw,) = struct.unpack_from(">H", tag, 12)
            gamma = raw / 256.0  # u8Fixed8Number
            if not 0.1 <= gamma <= 10.0:
                raise _ProfileError(f"implausible gamma {gamma:g}")
            y, label = x**gamma, _gamma_label(gamma)
        else:
            table = np.frombuffer(tag, dtype=">u2", count=entries, offset=12)
            y = np.interp(x, np.linspace(0.0, 1.0, entries), table / 65535.0)
            label = f"tone curve (profile, table of {entries} points)"
    elif kind == b"para":
        (func,) = struct.unpack_from(">H", tag, 8)
        if func not in _PARA_COUNTS:
            raise _ProfileError(f"unknown parametric curve type {func}")
        need = _PARA_COUNTS[func]
        if 12 + 4 * need > size:
            raise _ProfileError("parametric curve runs past the end")
        params = [v / 65536.0 for v in struct.unpack_from(f">{need}i", tag, 12)]  # s15Fixed16
        if not 0.1 <= params[0] <= 10.0:
            raise _ProfileError(f"implausible gamma {params[0]:g}")
        with np.errstate(all="ignore"):
            y = _parametric_curve(func, params, x)
        label = _gamma_label(params[0]) if func == 0 else f"tone curve (profile, parametric type {func})"
    else:
        raise _ProfileError(f"tone curve of unknown type {kind!r}")
    y = np.asarray(y, dtype=np.float64)
    if not np.all(np.isfinite(y)) or not y[-1] > y[0]:
        raise _ProfileError("tone curve is not increasing")
    lut = np.clip(y, 0.0, 1.0).astype(np.float32)
    if np.max(np.abs(lut - _lut_identity(levels))) < 1e-3:
        label = "linear (profile)"
    elif np.max(np.abs(lut - _lut_srgb(levels))) < 2e-3:
        label = "sRGB (embedded profile)"
    return lut, label


def _gamma_label(gamma: float) -> str:
    if abs(gamma - 1.0) < 1e-3:
        return "linear (profile)"
    return f"gamma {gamma:.3g} (profile)"


def _tone_curve(info: dict, profile_space: bytes, levels: int) -> tuple[np.ndarray, str]:
    """Choose the tone curve from what the file carries.

    Order of precedence (PNG specification, 11.3.3): an ICC profile, then the PNG
    ``sRGB`` chunk, then ``gAMA``; with none of them sRGB is assumed (common
    practice for scanners and cameras).

    References
    ----------
    .. [1] W3C, Portable Network Graphics (PNG) Specification (Third Edition),
       sections 11.3.3.2 (gAMA), 11.3.3.4 (iCCP) and 11.3.3.5 (sRGB).
    """
    profile = info.get("icc_profile")
    note = ""
    if isinstance(profile, (bytes, bytearray)) and profile:
        try:
            return _icc_tone_curve(bytes(profile), levels, profile_space)
        except (_ProfileError, struct.error, ValueError) as exc:
            note = f"; embedded profile unusable: {exc}"
    if "srgb" in info:
        return _lut_srgb(levels), "sRGB (PNG sRGB chunk)"
    gamma = info.get("gamma")
    if isinstance(gamma, (int, float)) and 0.05 <= gamma <= 20.0:
        # gAMA stores the encoding exponent: encoded = linear ** gamma.
        if abs(gamma - 1.0) < 1e-3:
            return _lut_identity(levels), "linear (PNG gAMA 1.0)"
        inverse = 1.0 / gamma
        return _lut_power(levels, inverse), f"gamma {inverse:.3g} (PNG gAMA {gamma:.5g})"
    return _lut_srgb(levels), f"sRGB (assumed{note})"


# ------------------------------------------------------------------------- DPI


def _fmt(v: float) -> str:
    return f"{v:.7g}"


def _round_dpi(v: float, *, px_per_m: int | None = None) -> tuple[float, bool]:
    """Read ``v`` dpi as a whole number when the file cannot tell the two apart."""
    n = round(v)
    if n <= 0:
        return v, False
    if px_per_m is not None and round(n / 0.0254) == px_per_m:
        return float(n), n != v
    if abs(v - n) <= _DPI_ROUND_RTOL * n:
        return float(n), n != v
    return v, False


def _judge_dpi(values: tuple[float, float], found: str) -> tuple[tuple[float, float] | None, str]:
    """Reject junk and the 72/96 defaults; ``found`` says where the values came from."""
    x, y = values
    if not all(math.isfinite(v) and MIN_DPI <= v <= MAX_DPI for v in values):  # the range of check_dpi
        return None, f"{found}: not a plausible resolution, ignored; DPI unknown"
    if min(x, y) < MIN_PLAUSIBLE_FILE_DPI:
        return None, (
            f"{found}: under {MIN_PLAUSIBLE_FILE_DPI:g} dpi is implausible for a scan; the value came from the file "
            "and is ignored; DPI unknown (give --dpi N if it is right)"
        )
    if abs(x - y) > MAX_FILE_DPI_ANISOTROPY * max(x, y):
        return None, (
            f"{found}: x and y differ by more than {MAX_FILE_DPI_ANISOTROPY:.0%}, implausible for a scan; the value "
            "came from the file and is ignored; DPI unknown (give --dpi X,Y if it is right)"
        )
    for v in values:
        for default in UNKNOWN_DPI_VALUES:
            if abs(v - default) < 0.02:
                return None, f"{found}: {default:g} dpi is a software default, not a measurement; DPI unknown"
    return (x, y), found


def _rational(value: object) -> float:
    """A TIFF/EXIF RATIONAL (pillow IFDRational or a (num, den) pair) as a float."""
    if isinstance(value, tuple) and len(value) == 2:
        num, den = value
        return float(num) / float(den) if float(den) else math.nan
    try:
        return float(value)  # type: ignore[arg-type]
    except (TypeError, ValueError, ZeroDivisionError, OverflowError):
        return math.nan


def _first(value: object) -> object:
    if isinstance(value, (tuple, list)) and value and not hasattr(value, "numerator"):
        return value[0]
    return value


def _dpi_from_tags(xres: object, yres: object, unit: object, what: str) -> tuple[tuple[float, float] | None, str]:
    """Resolution from TIFF-style XResolution/YResolution/ResolutionUnit tags.

    References
    ----------
    .. [1] Adobe, TIFF Revision 6.0 (1992), section 8, tags 282, 283 and 296
       (ResolutionUnit 1 = none, 2 = inch (the default), 3 = centimetre).
    .. [2] CIPA DC-008-2019 (Exif 2.32), section 4.6.5, the same tags in IFD0.
    """
    if xres is None:
        return None, f"no {what} resolution"
    x = _rational(_first(xres))
    y = _rational(_first(yres)) if yres is not None else x
    unit = _first(unit)
    unit = 2 if unit is None else unit
    if unit == 1:
        return None, f"{what} resolution has no unit (aspect ratio only); DPI unknown"
    if unit not in (2, 3):
        return None, f"{what} resolution unit {unit!r} is not inch or cm; DPI unknown"
    if unit == 3:
        found = f"{what} resolution {_fmt(x)} x {_fmt(y)} pixels per cm"
        x, y = x * 2.54, y * 2.54
        found += f" = {_fmt(x)} x {_fmt(y)} dpi"
    else:
        found = f"{what} resolution {_fmt(x)} x {_fmt(y)} dpi"
    if math.isfinite(x) and math.isfinite(y):
        (rx, xr), (ry, yr) = _round_dpi(x), _round_dpi(y)
        if xr or yr:
            found += f", read as {_fmt(rx)} x {_fmt(ry)} dpi"
        x, y = rx, ry
    return _judge_dpi((x, y), found)


def _dpi_png(im: Image.Image) -> tuple[tuple[float, float] | None, str]:
    """PNG pHYs: pixels per metre (unit 1) or an aspect ratio only (unit 0)."""
    dpi = im.info.get("dpi")
    if dpi is None:
        if "aspect" in im.info:
            return None, "PNG pHYs has no unit (aspect ratio only); DPI unknown"
        return None, "no DPI in the file (PNG without pHYs)"
    # pillow reports pHYs as px/m * 0.0254; recover the stored whole px/m.
    ppm = [round(float(v) / 0.0254) for v in dpi]
    raw = [p * 0.0254 for p in ppm]
    found = f"PNG stores pixels per metre: {ppm[0]} x {ppm[1]} px/m = {_fmt(raw[0])} x {_fmt(raw[1])} dpi"
    (x, xr), (y, yr) = _round_dpi(raw[0], px_per_m=ppm[0]), _round_dpi(raw[1], px_per_m=ppm[1])
    if xr or yr:
        found += f", read as {_fmt(x)} x {_fmt(y)} dpi"
    return _judge_dpi((x, y), found)


def _dpi_jpeg(im: Image.Image) -> tuple[tuple[float, float] | None, str]:
    """JFIF density (unit 0 = aspect only, 1 = inch, 2 = cm), else EXIF resolution.

    Pillow substitutes 72 dpi when EXIF lacks a resolution, so the raw fields are
    read here instead of ``info["dpi"]``.

    References
    ----------
    .. [1] JPEG File Interchange Format, version 1.02 (1992); ITU-T T.871 (2011),
       section 10.1 (APP0: units, Xdensity, Ydensity).
    """
    notes = []
    unit = im.info.get("jfif_unit")
    density = im.info.get("jfif_density")
    if unit in (1, 2) and isinstance(density, tuple) and len(density) == 2:
        dpi, note = _dpi_from_tags(density[0], density[1], unit + 1, "JPEG JFIF")
        if dpi is not None:
            return dpi, note
        notes.append(note)
    elif unit == 0:
        notes.append("JPEG JFIF density has no unit (aspect ratio only)")
    try:
        exif = im.getexif()
        xres, yres, eunit = exif.get(0x011A), exif.get(0x011B), exif.get(0x0128)
    except Exception:  # noqa: BLE001 -- malformed EXIF takes many shapes in pillow
        xres = yres = eunit = None
        notes.append("EXIF unreadable")
    if xres is not None:
        dpi, note = _dpi_from_tags(xres, yres, eunit, "EXIF")
        if dpi is not None:
            return dpi, note
        notes.append(note)
    if not any(n.endswith("DPI unknown") for n in notes):
        notes.append("no DPI in the file")
    return None, "; ".join(notes)


def _dpi_tiff(im: Image.Image) -> tuple[tuple[float, float] | None, str]:
    tags = getattr(im, "tag_v2", None)
    if tags is None:
        return None, "no DPI in the file"
    try:
        xres, yres, unit = tags.get(282), tags.get(283), tags.get(296)
    except Exception:  # noqa: BLE001
        return None, "TIFF resolution tags unreadable; DPI unknown"
    if xres is None:
        return None, "no DPI in the file (TIFF without XResolution)"
    return _dpi_from_tags(xres, yres, unit, "TIFF")


def _dpi_from_pillow(im: Image.Image) -> tuple[tuple[float, float] | None, str]:
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # pillow warns about corrupt EXIF
            if im.format == "PNG":
                return _dpi_png(im)
            if im.format in ("JPEG", "MPO"):
                return _dpi_jpeg(im)
            if im.format == "TIFF":
                return _dpi_tiff(im)
    except (TypeError, ValueError, OverflowError, ZeroDivisionError, KeyError, IndexError, struct.error) as exc:
        return None, f"resolution fields unreadable ({exc}); DPI unknown"
    return None, "no DPI in the file"


def read_dpi(path: str | os.PathLike) -> tuple[tuple[float, float] | None, str]:
    """Resolution stored in an image file, without decoding its pixels.

    Parameters
    ----------
    path : str or os.PathLike
        A JPEG, PNG or TIFF file.

    Returns
    -------
    dpi : tuple of float (x, y) or None
        ``None`` when the file has none, or only a 72/96 software default.
    note : str
        What was found and what was made of it.

    Raises
    ------
    ImageError
        The file is missing or is not a readable image.
    """
    data, name = _read_file(path)
    im = _open(data, name)
    try:
        return _dpi_from_pillow(im)
    finally:
        im.close()


# ----------------------------------------------------------------------- files


_SIGNATURES = (
    (b"\x89PNG\r\n\x1a\n", "PNG"),
    (b"\xff\xd8\xff", "JPEG"),
    (b"II*\x00", "TIFF"),
    (b"MM\x00*", "TIFF"),
    (b"II+\x00", "TIFF"),
    (b"MM\x00+", "TIFF"),
    (b"GIF87a", "GIF"),
    (b"GIF89a", "GIF"),
    (b"BM", "BMP"),
    (b"%PDF", "PDF"),
)


def _sniff(data: bytes) -> str | None:
    """Name the format from the first bytes, for error messages only."""
    for magic, name in _SIGNATURES:
        if data.startswith(magic):
            return name
    if data[:4] == b"RIFF" and data[8:12] == b"WEBP":
        return "WebP"
    if data[4:8] == b"ftyp" and data[8:12] in (b"heic", b"heix", b"mif1", b"msf1", b"hevc", b"avif"):
        return "HEIF/AVIF"
    return None


def _read_file(path: str | os.PathLike) -> tuple[bytes, str]:
    """The file's bytes (regular files only, at most the file's size) and its name for messages."""
    name = os.fspath(path)
    if isinstance(name, bytes):
        name = os.fsdecode(name)
    data = read_regular(name, error=ImageError, what="image file", fix=f"give the path of a {_FORMAT_NAMES} file")
    if not data:
        raise ImageError("file is empty (0 bytes); scan or export the image again", path=display_path(name))
    return data, name


def _tiff_sample_format(data: bytes) -> str | None:
    """The pixel type of a TIFF that tifffile can parse (e.g. "float64"), else None."""
    try:
        import tifffile

        with tifffile.TiffFile(io.BytesIO(data)) as tif:
            page = tif.pages.first
            return f"{np.dtype(page.dtype).name}, {page.samplesperpixel} sample(s) per pixel"
    except Exception:  # noqa: BLE001 -- a damaged TIFF fails in many ways
        return None


def _not_readable(data: bytes, name: str) -> ImageError:
    kind = _sniff(data)
    name = display_path(name)
    if kind == "TIFF":
        described = _tiff_sample_format(data)
        if described is not None:
            return ImageError(
                f"TIFF pixel format ({described}) is not supported; save it as 8- or 16-bit greyscale or RGB, "
                "or 32-bit float greyscale",
                path=name,
            )
    if kind in ("PNG", "JPEG", "TIFF"):
        return ImageError(
            f"looks like a {kind} file but cannot be decoded (damaged or truncated); copy or export it again",
            path=name,
        )
    if kind is not None:
        return ImageError(
            f"is a {kind} file; scanmass reads {_FORMAT_NAMES} images; convert it to PNG or TIFF", path=name
        )
    return ImageError(f"is not a {_FORMAT_NAMES} image; export the scan as PNG, TIFF or JPEG", path=name)


def _open_without_bomb_guard(data: bytes) -> Image.Image:
    """Identify the file as :func:`PIL.Image.open` does, minus its pixel-count guard.

    Only reached when pillow's guard (which is stricter than ours by default) has
    refused the header; our own ``max_pixels`` check follows right after.
    """
    Image.init()
    prefix = data[:16]
    for fmt in _PIL_FORMATS:
        factory, accept = Image.OPEN[fmt]
        ok = accept is None or accept(prefix)
        if ok and not isinstance(ok, str):
            try:
                return factory(io.BytesIO(data), "")
            except (SyntaxError, IndexError, TypeError, struct.error):
                continue
    raise UnidentifiedImageError("cannot identify image file")


def _open(data: bytes, name: str) -> Image.Image:
    """Open (header only) with pillow, limited to our formats; errors -> ImageError."""
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")  # DecompressionBombWarning, corrupt EXIF, ...
            try:
                return Image.open(io.BytesIO(data), formats=list(_PIL_FORMATS))
            except Image.DecompressionBombError:
                return _open_without_bomb_guard(data)
    except MemoryError:  # the machine, not the file
        raise
    except Exception:  # noqa: BLE001 -- pillow raises a zoo of types on malformed headers
        raise _not_readable(data, name) from None


@contextmanager
def _pillow_guard_lifted() -> Iterator[None]:
    """Lift pillow's pixel-count guard for one decode that ours has already allowed.

    Pillow re-checks the size while loading uncompressed TIFFs and keeps its limit in
    a module attribute; it is restored at once, under a lock.
    """
    with _PIL_GUARD_LOCK:
        saved = Image.MAX_IMAGE_PIXELS
        Image.MAX_IMAGE_PIXELS = None
        try:
            yield
        finally:
            Image.MAX_IMAGE_PIXELS = saved


@contextmanager
def _strict_truncation() -> Iterator[None]:
    """Make sure pillow refuses truncated files (``LOAD_TRUNCATED_IMAGES`` off) for one decode."""
    if not ImageFile.LOAD_TRUNCATED_IMAGES:
        yield
        return
    with _PIL_GUARD_LOCK:
        saved = ImageFile.LOAD_TRUNCATED_IMAGES
        ImageFile.LOAD_TRUNCATED_IMAGES = False
        try:
            yield
        finally:
            ImageFile.LOAD_TRUNCATED_IMAGES = saved


def _decode(im: Image.Image, name: str) -> None:
    """Decode every pixel now, so truncation surfaces here as an ImageError."""
    fmt = im.format or "image"
    try:
        with warnings.catch_warnings(), _strict_truncation():
            warnings.simplefilter("ignore")
            try:
                im.load()
            except Image.DecompressionBombError:
                with _pillow_guard_lifted():
                    im.load()
    except MemoryError:  # the machine, not the file
        raise
    except Exception as exc:  # noqa: BLE001 -- OSError, SyntaxError, ValueError, zlib.error, ...
        reason = " ".join(str(exc).split()) or type(exc).__name__
        raise ImageError(
            f"{fmt} image is truncated or damaged ({reason}); copy or export it again", path=display_path(name)
        ) from None


@contextmanager
def _captured_stderr() -> Iterator[list[str]]:
    """Collect what C libraries (libjpeg, libpng inside OpenCV) print on file descriptor 2.

    libjpeg reports corrupt entropy-coded data only as a warning and goes on with grey
    blocks; OpenCV lets it print that warning on stderr and returns the image. The
    text is caught here (the descriptor is redirected to a temporary file for the
    duration, under a lock) and handed back in the yielded list.
    """
    caught: list[str] = []
    with _STDERR_LOCK:
        try:
            saved = os.dup(2)
        except OSError:  # no stderr at all: nothing to catch
            yield caught
            return
        try:
            with tempfile.TemporaryFile() as sink:
                with contextlib.suppress(Exception):
                    sys.stderr.flush()
                os.dup2(sink.fileno(), 2)
                try:
                    yield caught
                finally:
                    os.dup2(saved, 2)
                    sink.seek(0)
                    caught.append(sink.read(8192).decode("utf-8", "replace"))
        finally:
            os.close(saved)


# libjpeg's warnings that mean the entropy-coded data are damaged (jerror.h: JWRN_HIT_MARKER,
# JWRN_HUFF_BAD_CODE, JWRN_ARITH_BAD_CODE, JWRN_MUST_RESYNC, JWRN_JPEG_EOF, JWRN_BOGUS_PROGRESSION,
# JWRN_EXTRANEOUS_DATA); extraneous bytes before the end marker (0xd9) are only trailing junk.
_JPEG_DAMAGE = re.compile(
    r"Corrupt JPEG data: (?!\d+ extraneous bytes before marker 0xd9)|Premature end of JPEG file|"
    r"Inconsistent progression sequence"
)


def _verify_jpeg(data: bytes, name: str) -> None:
    """Refuse a JPEG whose compressed data libjpeg finds corrupt (pillow does not say so).

    The file is decoded a second time at 1/8 scale (the whole entropy-coded stream is
    still read, but almost no pixels are made), with libjpeg's warnings caught.
    """
    import cv2

    buf = np.frombuffer(data, dtype=np.uint8)
    with _captured_stderr() as caught:
        arr = cv2.imdecode(buf, cv2.IMREAD_REDUCED_GRAYSCALE_8 | cv2.IMREAD_IGNORE_ORIENTATION)
    text = " ".join(caught)
    match = _JPEG_DAMAGE.search(text)
    if arr is None or match is not None:
        line = next((ln for ln in text.splitlines() if _JPEG_DAMAGE.search(ln)), "the decoder failed")
        raise ImageError(
            f"JPEG image is damaged ({' '.join(line.split())}); copy or export it again", path=display_path(name)
        )


def _jpeg_luma(data: bytes, size: tuple[int, int]) -> np.ndarray | None:
    """The luma plane of an intact JPEG in one decode, or None to take the checked path.

    libjpeg is asked for greyscale output (the stored Y channel, as pillow's
    ``draft("L")`` gives it; colour JPEGs stored as RGB are converted by libjpeg in
    both cases), at full size, without EXIF orientation, and its warnings are caught as
    in :func:`_verify_jpeg`. Any warning that means damage, a failed decode or another
    size returns None: the caller then decodes with pillow and :func:`_verify_jpeg`,
    which give the usual error. This replaces pillow's decode plus the 1/8-scale
    second decode of that check.
    """
    import cv2

    buf = np.frombuffer(data, dtype=np.uint8)
    with _captured_stderr() as caught:
        arr = cv2.imdecode(buf, cv2.IMREAD_GRAYSCALE | cv2.IMREAD_IGNORE_ORIENTATION)
    if arr is None or arr.dtype != np.uint8 or arr.shape != (size[1], size[0]):
        return None
    if _JPEG_DAMAGE.search(" ".join(caught)) is not None:
        return None
    return arr


def _verify_png(data: bytes, name: str) -> None:
    """Refuse a PNG whose chunks or compressed pixel stream are damaged.

    Pillow (like many readers) neither checks the CRC of the image-data chunks nor the
    zlib stream's Adler-32 checksum: it stops inflating when the image is full, so
    flipped bytes in the middle of the stream can give wrong pixels without a word.
    Here every chunk's CRC-32 is checked, and the whole zlib stream is inflated in
    pieces of 4 MiB (the output is discarded) to its end and its checksum.

    References
    ----------
    .. [1] W3C, Portable Network Graphics (PNG) Specification (Third Edition), sections
       5.3 (chunk layout, CRC) and 10 (compression: zlib datastream, RFC 1950).
    """
    shown = display_path(name)
    pos, end = 8, len(data)
    idat: list[memoryview] = []
    while pos + 12 <= end:
        (length,) = struct.unpack_from(">I", data, pos)
        kind = data[pos + 4 : pos + 8]
        body_end = pos + 8 + length
        if body_end + 4 > end:
            # a chunk runs past the end of the file: truncated, whatever a decoder makes of it
            raise ImageError(
                "PNG image is truncated or damaged (the file ends inside a "
                f"{kind.decode('latin-1', 'replace')} chunk); copy or export it again",
                path=shown,
            )
        (crc,) = struct.unpack_from(">I", data, body_end)
        if zlib.crc32(memoryview(data)[pos + 4 : body_end]) & 0xFFFFFFFF != crc:
            raise ImageError(
                f"PNG image is damaged (CRC error in a {kind.decode('latin-1', 'replace')} chunk); copy or export it again",
                path=shown,
            )
        if kind == b"IDAT":
            idat.append(memoryview(data)[pos + 8 : body_end])
        elif kind == b"IEND":
            break
        pos = body_end + 4
    if not idat:
        return
    inflater = zlib.decompressobj()
    piece, step = 1 << 20, 1 << 16  # output and input slices: memory stays at a few MiB
    try:
        for chunk in idat:
            view = memoryview(chunk)
            for start in range(0, len(view), step):
                inflater.decompress(view[start : start + step], piece)
                while inflater.unconsumed_tail:
                    inflater.decompress(inflater.unconsumed_tail, piece)
    except zlib.error as exc:
        raise ImageError(
            f"PNG image is damaged (compressed pixel data: {exc}); copy or export it again", path=shown
        ) from None
    if not inflater.eof:
        raise ImageError(
            "PNG image is truncated or damaged (the compressed pixel data end early); copy or export it again",
            path=shown,
        )


def _decoded_bytes(im: Image.Image, bits: int, deep: bool) -> tuple[int, int, int, int]:
    """(bytes, channels, bytes per sample, copies) the decoded pixels take.

    bytes = width x height x channels x bytes per sample x copies.
    """
    width, height = im.size
    channels = len(im.getbands())
    per_sample = 2 if deep else max(1, (bits + 7) // 8)
    if im.mode in ("I", "F"):
        per_sample = 4
    # OpenCV decodes 16-bit colour PNG into one buffer and reorders the channels into a second
    copies = 2 if deep and im.format == "PNG" else 1
    return width * height * channels * per_sample * copies, channels, per_sample, copies


def _check_memory(im: Image.Image, bits: int, deep: bool, max_pixels: int, name: str, fmt: str) -> None:
    """Refuse a file whose decoded pixels would need more than the memory budget (bytes)."""
    need, channels, per_sample, copies = _decoded_bytes(im, bits, deep)
    budget = BUDGET_BYTES_PER_PIXEL * max_pixels
    if need > budget:
        width, height = im.size
        twice = " x 2 copies" if copies == 2 else ""
        raise ImageError(
            f"{fmt} image of {width} x {height} px x {channels} channel(s) x {per_sample} byte(s){twice} needs "
            f"{need / 1e9:.2f} GB to decode, over the memory budget of {budget / 1e9:.2f} GB "
            f"({BUDGET_BYTES_PER_PIXEL} bytes per pixel of --max-pixels); if the file is trusted, raise the "
            f"limit with --max-pixels N (N >= {-(-need // BUDGET_BYTES_PER_PIXEL)})",
            path=display_path(name),
        )


def _orientation(im: Image.Image) -> int:
    try:
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            value = im.getexif().get(0x0112, 1)
    except Exception:  # noqa: BLE001 -- unreadable EXIF means no orientation
        return 1
    value = _first(value)
    return int(value) if isinstance(value, numbers.Integral) and 1 <= int(value) <= 8 else 1


def _apply_orientation(grey: np.ndarray, orientation: int) -> np.ndarray:
    """Apply an EXIF orientation, as PIL.ImageOps.exif_transpose does, on the array.

    References
    ----------
    .. [1] CIPA DC-008-2019 (Exif 2.32), tag 0x0112 Orientation.
    """
    ops: dict[int, Callable[[np.ndarray], np.ndarray]] = {
        2: lambda a: a[:, ::-1],  # FLIP_LEFT_RIGHT
        3: lambda a: a[::-1, ::-1],  # ROTATE_180
        4: lambda a: a[::-1, :],  # FLIP_TOP_BOTTOM
        5: lambda a: a.T,  # TRANSPOSE
        6: lambda a: np.rot90(a, -1),  # ROTATE_270 (90 degrees clockwise)
        7: lambda a: a[::-1, ::-1].T,  # TRANSVERSE
        8: lambda a: np.rot90(a, 1),  # ROTATE_90 (90 degrees counter-clockwise)
    }
    op = ops.get(orientation)
    return grey if op is None else np.ascontiguousarray(op(grey))


def _png_header(data: bytes) -> tuple[int, int] | None:
    """(bit depth, colour type) from a PNG IHDR chunk."""
    if len(data) >= 26 and data[12:16] == b"IHDR":
        return data[24], data[25]
    return None


def _bits_per_sample(im: Image.Image, data: bytes) -> int:
    if im.mode == "1":
        return 1
    if im.format == "PNG":
        header = _png_header(data)
        if header:
            return int(header[0])
    if im.format == "TIFF":
        bits = getattr(im, "tag_v2", {}).get(258)
        bits = _first(bits)
        if isinstance(bits, numbers.Integral) and int(bits) > 0:
            return int(bits)
    if im.mode.startswith("I;16"):
        return 16
    if im.mode in ("I", "F"):
        return 32
    return 8


def _is_deep_colour(im: Image.Image, data: bytes, bits: int) -> bool:
    """16-bit colour or grey+alpha, which pillow would cut to 8 bits on decode."""
    if bits != 16 or im.mode not in ("RGB", "RGBA", "LA", "RGBX"):
        return False
    if im.format == "PNG":
        header = _png_header(data)
        return header is not None and header[1] in (2, 4, 6)
    return im.format == "TIFF"


# ------------------------------------------------------------------ conversions


def _luma(red: np.ndarray, green: np.ndarray, blue: np.ndarray) -> np.ndarray:
    """ITU-R BT.601 luma of encoded channels, rounded, in the channels' dtype.

    8-bit: pillow's fixed-point weights (19595, 38470, 7471) / 65536, so arrays and
    files decoded by pillow agree exactly. 16-bit: the exact weights
    (299, 587, 114) / 1000, since the fixed-point ones drift by up to 0.7 levels at
    65535.

    References
    ----------
    .. [1] ITU-R BT.601-7 (2011), section 2.5.1: E'Y = 0.299 E'R + 0.587 E'G + 0.114 E'B.
    """
    if red.dtype == np.uint8:
        weights, scale = (_LUMA_R, _LUMA_G, _LUMA_B), 1 << 16
    else:
        weights, scale = (299, 587, 114), 1000
    acc = red.astype(np.uint32) * np.uint32(weights[0])
    acc += green.astype(np.uint32) * np.uint32(weights[1])
    acc += blue.astype(np.uint32) * np.uint32(weights[2])
    acc += np.uint32(scale // 2)
    acc //= np.uint32(scale)
    return acc.astype(red.dtype)


def _over_white(grey: np.ndarray, alpha: np.ndarray) -> np.ndarray:
    """Composite encoded grey over white with straight (unassociated) alpha."""
    top = 255 if grey.dtype == np.uint8 else 65535
    wide: type[np.unsignedinteger[Any]] = (
        np.uint32 if top == 255 else np.uint64
    )  # 255 * 255 fits 32 bits; 16-bit takes 64
    g: np.ndarray = grey.astype(wide)
    a: np.ndarray = alpha.astype(wide)
    out: np.ndarray = g * a
    out += (top - a) * wide(top) + wide(top // 2)
    out //= wide(top)
    return out.astype(grey.dtype)


def _check_unit_range(values: np.ndarray, what: str, name: str | None) -> None:
    if not np.all(np.isfinite(values)):
        raise ImageError(f"{what} contains NaN or infinite values; replace them before loading", path=name)
    lo, hi = float(values.min()), float(values.max())
    if lo < -1e-6 or hi > 1.0 + 1e-6:
        raise ImageError(
            f"{what} values must be linear light in [0, 1], found [{lo:g}, {hi:g}]; scale them first", path=name
        )


def _float_to_u16(values: np.ndarray) -> np.ndarray:
    v = np.clip(values.astype(np.float32), 0.0, 1.0)
    return np.rint(v * np.float32(65535.0)).astype(np.uint16)


def _reduce_band(band: np.ndarray, *, premultiplied: bool = False) -> np.ndarray:
    """(rows, cols[, channels]) band of encoded grey/grey+alpha/RGB/RGBA -> grey band.

    Colour is reduced to luma, then transparency is composited over white
    (for premultiplied alpha, over = colour + white x (1 - alpha)).
    """
    if band.ndim == 2:
        return band
    channels = band.shape[2]
    if channels in (3, 4):
        grey = _luma(band[..., 0], band[..., 1], band[..., 2])
    else:
        grey = band[..., 0]
    if channels in (2, 4):
        alpha = band[..., channels - 1]
        if int(alpha.min()) == np.iinfo(grey.dtype).max:
            return grey  # opaque band (the usual case): compositing over white changes nothing
        if premultiplied:
            top = np.iinfo(grey.dtype).max
            wide = grey.astype(np.uint32) + (top - alpha.astype(np.uint32))
            grey = np.minimum(wide, top).astype(grey.dtype)
        else:
            grey = _over_white(grey, alpha)
    return grey


def _rows_per_band(width: int) -> int:
    return max(1, _BAND_PIXELS // max(1, width))


def _array_to_grey(arr: np.ndarray) -> tuple[np.ndarray, int, str]:
    """Numpy source -> (grey, bit depth, mode name); floats are linear light."""
    kind = arr.dtype.kind
    height, width = arr.shape[:2]
    channels = 1 if arr.ndim == 2 else arr.shape[2]
    mode = {1: "L", 2: "LA", 3: "RGB", 4: "RGBA"}[channels]
    if kind == "b":
        return np.where(arr.reshape(height, width), np.uint8(255), np.uint8(0)), 1, mode
    if kind == "f":
        out = np.empty((height, width), dtype=np.uint16)
        step = _rows_per_band(width)
        for r0 in range(0, height, step):
            band = arr[r0 : r0 + step]
            if band.ndim == 3 and band.shape[2] in (3, 4):
                f = band.astype(np.float32)
                # Luminance of linear channels with the same Rec. 601 weights.
                grey = f[..., 0] * np.float32(0.299) + f[..., 1] * np.float32(0.587) + f[..., 2] * np.float32(0.114)
                if band.shape[2] == 4:
                    grey = grey * f[..., 3] + (1 - f[..., 3])
            elif band.ndim == 3 and band.shape[2] == 2:
                f = band.astype(np.float32)
                grey = f[..., 0] * f[..., 1] + (1 - f[..., 1])
            else:
                grey = band if band.ndim == 2 else band[..., 0]
            out[r0 : r0 + step] = _float_to_u16(grey)
        return out, arr.dtype.itemsize * 8, mode
    dtype = np.uint8 if arr.dtype.itemsize == 1 else np.uint16
    out = np.empty((height, width), dtype=dtype)
    step = _rows_per_band(width)
    for r0 in range(0, height, step):
        out[r0 : r0 + step] = _reduce_band(np.asarray(arr[r0 : r0 + step], dtype=dtype))
    return out, 8 * np.dtype(dtype).itemsize, mode


def _load_array(arr: np.ndarray, dpi: tuple[float, float] | None, max_pixels: int) -> LoadedImage:
    what = f"array input (dtype {arr.dtype}, shape {arr.shape})"
    kind = arr.dtype.kind
    ok_dtype = kind in "bf" or (kind == "u" and arr.dtype.itemsize in (1, 2))
    if not ok_dtype:
        raise ImageError(
            f"{what}: unsupported dtype; pass uint8 or uint16 (sRGB-encoded), float in [0, 1] (linear) or bool"
        )
    if arr.ndim not in (2, 3) or (arr.ndim == 3 and arr.shape[2] not in (1, 2, 3, 4)):
        raise ImageError(f"{what}: unsupported shape; pass (rows, cols) or (rows, cols, 1/2/3/4 channels)")
    if kind == "b" and arr.ndim == 3 and arr.shape[2] != 1:
        raise ImageError(f"{what}: a bool array must have one channel; pass (rows, cols)")
    height, width = int(arr.shape[0]), int(arr.shape[1])
    _check_size(width, height, max_pixels, None, what)
    if kind == "f":
        with np.errstate(all="ignore"):
            _check_unit_range(arr, what, None)
    grey, bits, mode = _array_to_grey(arr)
    if kind in "fb":
        lut, encoding = _lut_identity(65536 if kind == "f" else 256), "linear (array)"
    else:
        lut, encoding = _lut_srgb(256 if grey.dtype == np.uint8 else 65536), "sRGB (assumed)"
    note = "dpi given by the caller" if dpi else "array input carries no DPI; pass dpi="
    return LoadedImage(
        grey=np.ascontiguousarray(grey),
        to_linear=lut,
        dpi=dpi,
        dpi_note=note,
        encoding=encoding,
        path=None,
        sha256=None,
        format=None,
        mode=mode,
        bit_depth=bits,
        orientation=1,
        width_px=width,
        height_px=height,
    )


def _check_size(width: int, height: int, max_pixels: int, name: str | None, what: str = "image") -> None:
    if width < MIN_SIDE_PX or height < MIN_SIDE_PX:
        raise ImageError(
            f"{what} is only {width} x {height} px; at least {MIN_SIDE_PX} x {MIN_SIDE_PX} px is needed; "
            "scan at a higher resolution",
            path=name,
        )
    if width * height > max_pixels:
        raise ImageError(
            f"{what} is {width} x {height} px = {width * height / 1e6:.1f} megapixels, over the limit of "
            f"{max_pixels} px; if the file is trusted, raise the limit with --max-pixels N "
            f"(N >= {width * height})",
            path=name,
        )


# Pillow modes decoded through pillow, and what each band becomes.
_GREY8_MODES = ("1", "L", "P", "RGB", "RGBX", "CMYK", "YCbCr")
_ALPHA8_MODES = ("LA", "La", "PA", "RGBA", "RGBa")
_GREY16_MODES = ("I;16", "I;16L", "I;16B", "I;16N")


def _pillow_grey(im: Image.Image, name: str) -> tuple[np.ndarray, bool]:
    """Decoded pillow image -> (grey array, values are linear light).

    Works in bands of rows so that no full-size intermediate beyond the decoded
    image and the output exists.
    """
    mode = im.mode
    width, height = im.size
    has_key = "transparency" in im.info and mode in ("L", "RGB", "P")
    dtype: type[np.unsignedinteger[Any]]
    if mode in _GREY8_MODES and not has_key:
        dtype, linear = np.uint8, False

        def band_grey(band: Image.Image) -> np.ndarray:
            return np.asarray(band if band.mode == "L" else band.convert("L"))

    elif mode in _ALPHA8_MODES or has_key:
        dtype, linear = np.uint8, False

        def band_grey(band: Image.Image) -> np.ndarray:
            if band.mode == "La":  # pillow converts premultiplied grey only to LA
                band = band.convert("LA")
            rgba = band if band.mode == "RGBA" else band.convert("RGBA")
            return _over_white(np.asarray(rgba.convert("L")), np.asarray(rgba.getchannel("A")))

    elif mode in _GREY16_MODES:
        dtype, linear = np.uint16, False

        def band_grey(band: Image.Image) -> np.ndarray:
            return np.asarray(band).astype(np.uint16)

    elif mode == "I":
        dtype, linear = np.uint16, False

        def band_grey(band: Image.Image) -> np.ndarray:
            values = np.asarray(band)
            if values.size and (values.min() < 0 or values.max() > 65535):
                raise ImageError(
                    "32-bit integer pixels outside 0..65535 are not supported; save it as 8- or 16-bit",
                    path=name,
                )
            return values.astype(np.uint16)

    elif mode == "F":
        dtype, linear = np.uint16, True

        def band_grey(band: Image.Image) -> np.ndarray:
            values = np.asarray(band)
            _check_unit_range(values, "32-bit float image", name)
            return _float_to_u16(values)

    else:
        raise ImageError(
            f"unsupported pixel format {mode} ({im.format}); save it as 8- or 16-bit greyscale or RGB",
            path=name,
        )

    out = np.empty((height, width), dtype=dtype)
    step = _rows_per_band(width)
    try:
        for r0 in range(0, height, step):
            r1 = min(height, r0 + step)
            band = im.crop((0, r0, width, r1))
            out[r0:r1] = band_grey(band)
    except ImageError:
        raise
    except MemoryError:  # the machine, not the file
        raise
    except Exception as exc:  # noqa: BLE001 -- conversion errors from pillow
        raise ImageError(
            f"cannot convert {mode} pixels to grey ({exc}); save it as 8- or 16-bit greyscale or RGB", path=name
        ) from None
    return out, linear


def _stored_size(im: Image.Image, data: bytes) -> tuple[int, int]:
    """(width, height) as stored, before any orientation (pillow may report it swapped)."""
    if im.format == "TIFF":
        tags = getattr(im, "tag_v2", {})
        width, height = _first(tags.get(256)), _first(tags.get(257))
        if isinstance(width, numbers.Integral) and isinstance(height, numbers.Integral):
            return int(width), int(height)
    return im.size


def _deep_grey(data: bytes, fmt: str, stored: tuple[int, int], name: str) -> np.ndarray:
    """16-bit colour or grey+alpha, which pillow cuts to 8 bits: decode elsewhere.

    PNG through OpenCV (``IMREAD_UNCHANGED`` keeps 16 bits and alpha and ignores
    EXIF orientation); TIFF through tifffile (a scikit-image dependency), because
    OpenCV applies -- and for some values fails on -- the TIFF orientation itself.
    Both return the pixels as stored; the orientation is applied by the caller.
    """
    premultiplied = False
    order: list[int] | None = None
    problem = ""
    try:
        if fmt == "PNG":
            import cv2

            with _captured_stderr() as caught:
                arr = cv2.imdecode(np.frombuffer(data, dtype=np.uint8), cv2.IMREAD_UNCHANGED)
            text = " ".join(" ".join(caught).split())
            # libpng reports damage (bad deflate data, CRC, truncation) on stderr, or
            # OpenCV's log does; either way the decode is refused as damaged.
            if (arr is None and text) or re.search(r"libpng|error|incomplete|CRC|IDAT", text):
                problem = re.sub(r"^\[[^]]*\]\s*(global\s+\S+\s+\S+\s+)?", "", text)[:200]
                arr = None
            if arr is not None and arr.ndim == 3 and arr.shape[2] in (3, 4):
                order = [2, 1, 0, 3][: arr.shape[2]]  # BGR(A) -> RGB(A), band by band
        else:
            import tifffile

            with tifffile.TiffFile(io.BytesIO(data)) as tif:
                page = tif.pages.first
                extra = tuple(getattr(page, "extrasamples", ()) or ())
                premultiplied = bool(extra) and int(extra[0]) == 1  # ASSOCALPHA
                axes = page.axes
                arr = page.asarray()
            if axes == "SYX":
                arr = np.moveaxis(arr, 0, -1)
            elif axes not in ("YXS", "YX"):
                arr = None
    except MemoryError:  # the machine, not the file
        raise
    except Exception:  # noqa: BLE001 -- decoder errors of every type
        arr = None
    width, height = stored
    if problem:
        raise ImageError(
            f"{fmt} image is truncated or damaged ({problem}); copy or export it again", path=display_path(name)
        )
    if arr is None or arr.shape[:2] != (height, width) or arr.dtype not in (np.uint8, np.uint16):
        raise ImageError(
            f"{fmt} image with 16-bit colour could not be decoded (damaged, or a layout not supported); "
            "save it as 16-bit greyscale or 8-bit RGB",
            path=display_path(name),
        )
    out = np.empty((height, width), dtype=arr.dtype)
    step = _rows_per_band(width)
    for r0 in range(0, height, step):
        band = arr[r0 : r0 + step]
        if order is not None:
            band = band[..., order]
        out[r0 : r0 + step] = _reduce_band(band, premultiplied=premultiplied)
    return out


def _profile_space(mode: str) -> bytes:
    """ICC colour space that fits the decoded data (b"" = any that we can read)."""
    if mode in ("1", "L", "LA", "La", "I", "F") or mode.startswith("I;16"):
        return b"GRAY"
    if mode in ("RGB", "RGBA", "RGBa", "RGBX", "P", "PA", "YCbCr"):
        return b"RGB "
    return mode.encode("latin-1")[:4].ljust(4)


# -------------------------------------------------------------------- public


def load_image(
    source: str | os.PathLike | np.ndarray,
    *,
    dpi: float | tuple[float, float] | None = None,
    max_pixels: int = DEFAULT_MAX_PIXELS,
) -> LoadedImage:
    """Load a scan or photo as an encoded grey plane with its tone curve and DPI.

    Parameters
    ----------
    source : str, os.PathLike or ndarray
        A JPEG, PNG or TIFF file, or an array of shape (rows, cols) or
        (rows, cols, 1/2/3/4): uint8/uint16 values are taken as sRGB-encoded,
        float values as linear light in [0, 1], bool as 0/1 linear.
    dpi : float or (float, float), optional
        Resolution in dots per inch (x, y); overrides what the file says.
    max_pixels : int, optional
        Largest width x height accepted; checked from the header before decoding.

    Returns
    -------
    LoadedImage

    Raises
    ------
    OptionError
        ``dpi`` or ``max_pixels`` is out of range.
    ImageError
        The file is missing, empty, not an image, truncated, too small or too large,
        or has a pixel format that cannot be reduced to grey.

    Notes
    -----
    A missing DPI is not an error here: ``dpi`` is then ``None`` and the caller looks
    for another scale (a marker mat, a sheet of paper).

    References
    ----------
    .. [1] IEC 61966-2-1:1999, sRGB, section 5.2 (the assumed tone curve).
    .. [2] ICC.1:2010 (ISO 15076-1:2010), sections 10.5 and 10.15 (tone curve tags).
    .. [3] W3C PNG Specification (Third Edition), 11.3.3 (gAMA, iCCP, sRGB) and
       11.3.5.3 (pHYs).
    .. [4] Adobe TIFF 6.0, tags 282/283/296; CIPA DC-008 (Exif), tags 0x011A/0x011B/
       0x0128/0x0112; ITU-T T.871 (JFIF) APP0 density.

    Examples
    --------
    >>> import numpy as np
    >>> img = load_image(np.full((16, 16), 128, np.uint8), dpi=300)
    >>> img.dpi, img.encoding, img.grey.dtype.name, img.to_linear.shape
    ((300.0, 300.0), 'sRGB (assumed)', 'uint8', (256,))
    """
    max_pixels = check_max_pixels(max_pixels)
    given = (
        None
        if dpi is None
        else check_dpi(dpi, path=os.fspath(source) if isinstance(source, (str, os.PathLike)) else None)
    )
    if isinstance(source, np.ndarray):
        return _load_array(source, given, max_pixels)
    if not isinstance(source, (str, os.PathLike)):
        raise OptionError(f"source must be a file path or a numpy array, not {type(source).__name__}")

    data, name = _read_file(source)
    digest = hashlib.sha256(data).hexdigest()
    im = _open(data, name)
    try:
        fmt = "JPEG" if im.format == "MPO" else (im.format or "image")
        width, height = im.size
        _check_size(width, height, max_pixels, name, what=f"{fmt} image")
        file_dpi, file_note = _dpi_from_pillow(im)
        # Pillow's PNG reader decodes the whole image to look for an eXIf chunk after the
        # pixel data, and a failure there would be swallowed: read a PNG's orientation
        # only after the checked decode below (or when the chunk came before the pixels).
        orientation = _orientation(im) if im.format != "PNG" or "exif" in im.info else 1
        bits = _bits_per_sample(im, data)
        mode = im.mode
        info = dict(im.info)

        deep = _is_deep_colour(im, data, bits)
        if im.format in ("JPEG", "MPO") and im.mode in ("RGB", "YCbCr"):
            # libjpeg decodes the luma channel alone: a third of the memory and
            # time, and the exact Y the encoder stored.
            im.draft("L", im.size)
        _check_memory(im, bits, deep, max_pixels, name, fmt)
        if im.format == "PNG":
            # 16-bit colour too: OpenCV's libpng decode need not report a truncated stream
            _verify_png(data, name)
        if deep:
            # 16-bit colour: pillow would cut it to 8 bits; decode it once, elsewhere
            # (that decoder refuses damaged data itself).
            stored = _stored_size(im, data)
            pending = orientation
            im.close()
            grey, linear = _deep_grey(data, fmt, stored, name), False
        else:
            # an intact JPEG's luma plane in one decode, its damage checked on the way
            luma = _jpeg_luma(data, im.size) if im.format in ("JPEG", "MPO") and im.mode == "L" else None
            if luma is None:
                # Decoding everything now surfaces truncation and damage as an ImageError.
                _decode(im, name)
                if im.format in ("JPEG", "MPO"):
                    _verify_jpeg(data, name)
            # Recent pillow applies a TIFF orientation while loading and drops the tag;
            # apply whatever is still pending, once. (A PNG eXIf chunk after the image
            # data is only seen now.)
            pending = _orientation(im)
            if orientation == 1:
                orientation = pending
            grey, linear = (luma, False) if luma is not None else _pillow_grey(im, name)
    finally:
        im.close()

    grey = _apply_orientation(grey, pending)
    levels = 256 if grey.dtype == np.uint8 else 65536
    if linear:
        lut, encoding = _lut_identity(levels), "linear (float image)"
    elif mode in ("CMYK",):
        lut, encoding = _lut_srgb(levels), "sRGB (assumed; CMYK converted without its profile)"
    else:
        lut, encoding = _tone_curve(info, _profile_space(mode), levels)

    if file_dpi is not None and orientation >= 5 and file_dpi[0] != file_dpi[1]:
        # Orientations 5-8 swap rows and columns, and with them the two resolutions.
        file_dpi = (file_dpi[1], file_dpi[0])
        file_note += "; x and y swapped by the EXIF orientation"
    used: tuple[float, float] | None
    if given is not None:
        used = given
        note = f"dpi given by the caller ({_fmt(given[0])} x {_fmt(given[1])}); the file: {file_note}"
    else:
        used, note = file_dpi, file_note
    return LoadedImage(
        grey=np.ascontiguousarray(grey),
        to_linear=lut,
        dpi=used,
        dpi_note=note,
        encoding=encoding,
        path=name,
        sha256=digest,
        format=fmt,
        mode=mode,
        bit_depth=bits,
        orientation=orientation,
        width_px=int(grey.shape[1]),
        height_px=int(grey.shape[0]),
    )
