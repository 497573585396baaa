"""Synthetic scans with known truth.

The renderer draws polygons given in millimetres in the scan frame of DESIGN.md
(origin at the lower-left corner of the image, x to the right, y up) into an
image whose every pixel value is computed from the *exact* fraction of the pixel
the polygons cover. The polygon is the truth: a circle is the polygon
:func:`circle` returns, and tests and benchmarks compute the expected area,
centroid and second moments from the same vertices.

Pixel (column ``i``, row ``j``; rows counted from the top) of an image of
``H`` rows covers ``x`` in ``[i s_x, (i + 1) s_x]`` and ``y`` in
``[(H - j - 1) s_y, (H - j) s_y]``, so its centre is at
``((i + 0.5) s_x, (H - j - 0.5) s_y)``, with ``s = 25.4 / dpi`` mm per pixel.

Pipeline of :func:`render_scan`, all in linear light::

    exact coverage -> reflectance (background / part levels) -> x illumination
    -> Gaussian blur -> (noise-free ``linear``) -> + noise -> clip -> encode
    (sRGB or linear) -> quantise to 8 or 16 bits

:func:`save_scan` writes the result as PNG, TIFF or JPEG with its DPI.
"""

from __future__ import annotations

import io
import math
import os
import zlib
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Literal

import numpy as np

from scanmass.errors import OptionError, OutputError
from scanmass.geometry import signed_area
from scanmass.outputs.atomic import write_atomic
from scanmass.raster import _positive_pair, _ring_array, _shape_pair, coverage, srgb_decode, srgb_encode

__all__ = [
    "coverage",
    "SynthPart",
    "part_coverage",
    "SynthScan",
    "render_scan",
    "save_scan",
    "srgb_encode",
    "srgb_decode",
    "rectangle",
    "regular_polygon",
    "circle",
    "l_section",
    "annulus",
    "rotate",
]

MM_PER_INCH = 25.4


def _level(value: Any, name: str) -> float:
    v = float(value)
    if not (math.isfinite(v) and 0.0 <= v <= 1.0):
        raise OptionError(f"{name} must be a linear-light level in [0, 1], got {value!r}")
    return v


# --------------------------------------------------------------------------------------
# parts
# --------------------------------------------------------------------------------------


@dataclass
class SynthPart:
    """A flat part of the synthetic scene, in mm in the scan frame.

    Parameters
    ----------
    outer_mm : (N, 2) float ndarray
        Outer boundary (either orientation).
    holes_mm : list of (M, 2) float ndarrays
        Hole boundaries (either orientation), inside the outer boundary.
    level : float or None
        Linear-light reflectance of the part; None uses the scene's foreground.
    """

    outer_mm: np.ndarray
    holes_mm: list[np.ndarray] = field(default_factory=list)
    level: float | None = None

    def rings(self) -> list[np.ndarray]:
        """Rings oriented for :func:`coverage`: outer counter-clockwise, holes clockwise."""
        outer = _ring_array(self.outer_mm, "outer ring")
        rings = [outer if signed_area(outer) >= 0 else outer[::-1]]
        for hole in self.holes_mm:
            h = _ring_array(hole, "hole ring")
            rings.append(h if signed_area(h) <= 0 else h[::-1])
        return rings

    def transformed(
        self,
        *,
        angle_deg: float = 0.0,
        about_mm: tuple[float, float] = (0.0, 0.0),
        shift_mm: tuple[float, float] = (0.0, 0.0),
    ) -> SynthPart:
        """Copy rotated counter-clockwise by ``angle_deg`` about ``about_mm``, then shifted."""

        def move(ring: np.ndarray) -> np.ndarray:
            return rotate(ring, angle_deg, about_mm=about_mm) + np.asarray(shift_mm, dtype=float)

        return SynthPart(move(self.outer_mm), [move(h) for h in self.holes_mm], self.level)


def part_coverage(
    parts: Sequence[SynthPart],
    *,
    shape: tuple[int, int],
    mm_per_px: float | tuple[float, float],
) -> np.ndarray:
    """Exact covered fraction of each pixel by the given parts (holes excluded).

    Orients each outer ring counter-clockwise and each hole clockwise, then calls
    :func:`coverage`. Exact for parts that do not overlap each other.

    Parameters
    ----------
    parts : sequence of SynthPart
    shape : (int, int)
        Image shape (rows H, columns W) in pixels.
    mm_per_px : float or (float, float)
        Pixel size in mm.

    Returns
    -------
    (H, W) float64 ndarray in [0, 1]
    """
    rings: list[np.ndarray] = []
    for part in parts:
        rings.extend(part.rings())
    return coverage(rings, shape=shape, mm_per_px=mm_per_px)


# --------------------------------------------------------------------------------------
# shapes (mm, counter-clockwise)
# --------------------------------------------------------------------------------------


def rotate(points_mm: np.ndarray, angle_deg: float, *, about_mm: tuple[float, float] = (0.0, 0.0)) -> np.ndarray:
    """Rotate points counter-clockwise (y up) by ``angle_deg`` about ``about_mm``."""
    pts = np.asarray(points_mm, dtype=float)
    a = math.radians(angle_deg)
    c, s = math.cos(a), math.sin(a)
    centre = np.asarray(about_mm, dtype=float)
    d = pts - centre
    return np.column_stack([c * d[:, 0] - s * d[:, 1], s * d[:, 0] + c * d[:, 1]]) + centre


def rectangle(x0: float, y0: float, w: float, h: float, angle_deg: float = 0.0) -> np.ndarray:
    """Rectangle with lower-left corner (x0, y0), width w, height h (mm), rotated about its centre.

    Returns a (4, 2) counter-clockwise ring.
    """
    ring = np.array([[x0, y0], [x0 + w, y0], [x0 + w, y0 + h], [x0, y0 + h]], dtype=float)
    if angle_deg:
        ring = rotate(ring, angle_deg, about_mm=(x0 + 0.5 * w, y0 + 0.5 * h))
    return ring


def regular_polygon(cx: float, cy: float, r: float, n: int, phase_deg: float = 0.0) -> np.ndarray:
    """Regular n-gon with circumradius r (mm) about (cx, cy); first vertex at ``phase_deg``.

    Returns an (n, 2) counter-clockwise ring.
    """
    if int(n) < 3:
        raise OptionError(f"a regular polygon needs n >= 3 vertices, got {n!r}")
    a = np.radians(phase_deg) + 2.0 * np.pi * np.arange(int(n)) / int(n)
    return np.column_stack([cx + r * np.cos(a), cy + r * np.sin(a)])


def circle(cx: float, cy: float, r: float, n: int | None = None, *, max_sagitta_mm: float = 1e-4) -> np.ndarray:
    """Circle of radius r (mm) as an inscribed regular polygon (the polygon is the truth).

    Parameters
    ----------
    cx, cy, r : float
        Centre and radius in mm.
    n : int, optional
        Number of vertices. By default the smallest n (at least 16) whose sagitta
        ``r (1 - cos(pi / n))`` (the largest gap between chord and arc) is at most
        ``max_sagitta_mm``.
    max_sagitta_mm : float
        Chord-to-arc tolerance used when n is not given.
    """
    if n is None:
        ratio = min(max_sagitta_mm / r, 1.0)
        n = max(16, math.ceil(math.pi / math.acos(1.0 - ratio)))
    return regular_polygon(cx, cy, r, n)


def l_section(
    x0: float, y0: float, width: float, height: float, thickness: float, thickness_y: float | None = None
) -> np.ndarray:
    """L-shaped ring: corner at (x0, y0), a vertical leg on the left and a horizontal leg at the bottom.

    ``thickness`` is the vertical leg's width (along x); ``thickness_y`` the
    horizontal leg's height (default: the same). Returns a (6, 2)
    counter-clockwise ring.
    """
    ty = thickness if thickness_y is None else thickness_y
    return np.array(
        [
            [x0, y0],
            [x0 + width, y0],
            [x0 + width, y0 + ty],
            [x0 + thickness, y0 + ty],
            [x0 + thickness, y0 + height],
            [x0, y0 + height],
        ],
        dtype=float,
    )


def annulus(
    cx: float,
    cy: float,
    r_outer: float,
    r_inner: float,
    *,
    level: float | None = None,
    max_sagitta_mm: float = 1e-4,
) -> SynthPart:
    """Washer: circular outer boundary with one concentric circular hole."""
    if not 0 < r_inner < r_outer:
        raise OptionError(f"annulus needs 0 < r_inner < r_outer, got {r_inner!r} and {r_outer!r}")
    return SynthPart(
        circle(cx, cy, r_outer, max_sagitta_mm=max_sagitta_mm),
        [circle(cx, cy, r_inner, max_sagitta_mm=max_sagitta_mm)[::-1]],
        level,
    )


# --------------------------------------------------------------------------------------
# rendering
# --------------------------------------------------------------------------------------


@dataclass
class SynthScan:
    """A rendered synthetic scan and what went into it.

    Attributes
    ----------
    image : (H, W) or (H, W, 3) uint8 or uint16 ndarray
        Pixel values as they would be saved (encoded, quantised); colour planes
        in RGB order.
    dpi : float or (float, float)
        Scan resolution (x, y when a pair).
    parts : list of SynthPart
        The scene (the truth).
    linear : (H, W) float64 ndarray
        Noise-free linear light after illumination and blur, before noise,
        encoding and quantisation.
    settings : dict
        Every rendering option, JSON-friendly.
    """

    image: np.ndarray
    dpi: float | tuple[float, float]
    parts: list[SynthPart]
    linear: np.ndarray
    settings: dict[str, Any]

    @property
    def mm_per_px(self) -> tuple[float, float]:
        """Pixel size (x, y) in mm."""
        dx, dy = _positive_pair(self.dpi, "dpi")
        return MM_PER_INCH / dx, MM_PER_INCH / dy


def _gaussian_kernel(sigma_px: float) -> np.ndarray:
    """Gaussian integrated over unit pixel intervals, truncated at 4 sigma, unit sum.

    Integrating over each pixel (rather than sampling the density) keeps the
    kernel meaningful for sigma well below one pixel.
    """
    radius = max(1, math.ceil(4.0 * sigma_px))
    edges = (np.arange(-radius, radius + 2) - 0.5) / (sigma_px * math.sqrt(2.0))
    cdf = 0.5 * (1.0 + np.array([math.erf(e) for e in edges]))
    kernel = np.diff(cdf)
    return kernel / kernel.sum()


def _blur(image: np.ndarray, sigma_px: float) -> np.ndarray:
    """Separable Gaussian blur; borders mirrored (the scene continues symmetrically)."""
    import cv2  # local: only rendering with blur needs it

    kernel = _gaussian_kernel(sigma_px)
    return cv2.sepFilter2D(image, cv2.CV_64F, kernel, kernel, borderType=cv2.BORDER_REFLECT)


def render_scan(
    parts: Sequence[SynthPart],
    *,
    dpi: float | tuple[float, float] = 300.0,
    size_mm: tuple[float, float] | None = None,
    shape_px: tuple[int, int] | None = None,
    background: float = 0.85,
    foreground: float = 0.08,
    blur_px: float = 0.8,
    noise: float = 0.0,
    illumination: Callable[[np.ndarray, np.ndarray], np.ndarray] | tuple[float, float] | None = None,
    encoding: Literal["srgb", "linear"] = "srgb",
    bit_depth: int = 8,
    colour: bool = False,
    seed: int | None = None,
) -> SynthScan:
    """Render a synthetic flatbed scan of flat parts with exact edge coverage.

    Parameters
    ----------
    parts : sequence of SynthPart
        The scene in mm, scan frame (origin lower-left, y up). Parts must not
        overlap each other.
    dpi : float or (float, float)
        Resolution; one pixel is ``25.4 / dpi`` mm.
    size_mm : (float, float), optional
        Scene size (width, height) in mm; the image has ``round(size / s)``
        pixels each way.
    shape_px : (int, int), optional
        Image shape (rows H, columns W); give this or ``size_mm``. With neither,
        the image reaches from the origin to 10 mm beyond the parts.
    background, foreground : float
        Linear-light reflectance of the scanner lid and of parts without their
        own ``level``. The default is a dark part on a bright lid; swap the two
        for the other polarity.
    blur_px : float
        Sigma of the Gaussian optical blur in pixels, applied in linear light;
        0 for none.
    noise : float
        Sigma of additive Gaussian noise in linear light.
    illumination : callable or (gx, gy), optional
        Multiplicative light field. A callable gets pixel-centre coordinates
        ``(x_mm, y_mm)`` (arrays) and returns the field; a pair gives the linear
        field ``1 + gx (x - xm) / W + gy (y - ym) / H`` (xm, ym the image centre,
        W, H its size in mm).
    encoding : {"srgb", "linear"}
        Transfer function of the stored values.
    bit_depth : {8, 16}
        Stored bits per sample.
    colour : bool
        Three identical RGB planes instead of one grey plane.
    seed : int, optional
        Seed of the noise generator.

    Returns
    -------
    SynthScan

    Examples
    --------
    >>> scan = render_scan([SynthPart(rectangle(5, 5, 10, 10))], size_mm=(20, 20), dpi=100)
    >>> scan.image.shape, scan.image.dtype.name
    ((79, 79), 'uint8')
    """
    dpi_x, dpi_y = _positive_pair(dpi, "dpi")
    sx_mm, sy_mm = MM_PER_INCH / dpi_x, MM_PER_INCH / dpi_y
    background = _level(background, "background")
    foreground = _level(foreground, "foreground")
    if not (math.isfinite(blur_px) and blur_px >= 0):
        raise OptionError(f"blur_px must be >= 0 pixels, got {blur_px!r}")
    if not (math.isfinite(noise) and noise >= 0):
        raise OptionError(f"noise must be >= 0 (sigma in linear light), got {noise!r}")
    if encoding not in ("srgb", "linear"):
        raise OptionError(f"encoding must be 'srgb' or 'linear', got {encoding!r}")
    if bit_depth not in (8, 16):
        raise OptionError(f"bit_depth must be 8 or 16, got {bit_depth!r}")
    parts = list(parts)

    if shape_px is not None and size_mm is not None:
        raise OptionError("give either size_mm or shape_px, not both")
    if shape_px is not None:
        h_px, w_px = _shape_pair(shape_px)
    elif size_mm is not None:
        w_mm, h_mm = (float(v) for v in size_mm)
        if not (w_mm > 0 and h_mm > 0):
            raise OptionError(f"size_mm must be a positive (width, height) in mm, got {size_mm!r}")
        w_px, h_px = round(w_mm / sx_mm), round(h_mm / sy_mm)
        h_px, w_px = _shape_pair((max(h_px, 1), max(w_px, 1)))
    else:
        if not parts:
            raise OptionError("give size_mm or shape_px for a scene without parts")
        top = np.max(np.concatenate([_ring_array(p.outer_mm, "outer ring") for p in parts]), axis=0)
        w_px = max(1, math.ceil((top[0] + 10.0) / sx_mm))
        h_px = max(1, math.ceil((top[1] + 10.0) / sy_mm))
    shape = (h_px, w_px)

    # reflectance: background plus each level group's exact coverage
    reflectance = np.full(shape, background, dtype=np.float64)
    groups: dict[float, list[SynthPart]] = {}
    for part in parts:
        lvl = foreground if part.level is None else _level(part.level, "part level")
        groups.setdefault(lvl, []).append(part)
    for lvl, members in groups.items():
        if lvl != background:
            reflectance += (lvl - background) * part_coverage(members, shape=shape, mm_per_px=(sx_mm, sy_mm))

    linear = reflectance
    illum_desc: Any = None
    if illumination is not None:
        x_mm = (np.arange(w_px) + 0.5) * sx_mm
        y_mm = (h_px - np.arange(h_px) - 0.5) * sy_mm
        if callable(illumination):
            field_ = np.asarray(illumination(x_mm[None, :], y_mm[:, None]), dtype=np.float64)
            illum_desc = getattr(illumination, "__name__", repr(illumination))
        else:
            gx, gy = (float(v) for v in illumination)
            w_mm_img, h_mm_img = w_px * sx_mm, h_px * sy_mm
            field_ = (
                1.0
                + gx * (x_mm[None, :] - 0.5 * w_mm_img) / w_mm_img
                + gy * (y_mm[:, None] - 0.5 * h_mm_img) / h_mm_img
            )
            illum_desc = [gx, gy]
        linear = linear * np.broadcast_to(field_, shape)
    if blur_px > 0:
        linear = _blur(linear, blur_px)

    noisy = linear
    if noise > 0:
        rng = np.random.default_rng(seed)
        noisy = linear + rng.normal(0.0, noise, size=shape)
    noisy = np.clip(noisy, 0.0, 1.0)
    encoded = srgb_encode(noisy) if encoding == "srgb" else noisy
    top_code = (1 << bit_depth) - 1
    image = np.rint(encoded * top_code).astype(np.uint8 if bit_depth == 8 else np.uint16)
    if colour:
        image = np.repeat(image[:, :, None], 3, axis=2)

    settings = {
        "dpi": [dpi_x, dpi_y] if np.ndim(dpi) else dpi_x,
        "mm_per_px": [sx_mm, sy_mm],
        "shape_px": [h_px, w_px],
        "background": background,
        "foreground": foreground,
        "part_levels": [foreground if p.level is None else float(p.level) for p in parts],
        "blur_px": float(blur_px),
        "noise": float(noise),
        "illumination": illum_desc,
        "encoding": encoding,
        "bit_depth": bit_depth,
        "colour": bool(colour),
        "seed": seed,
    }
    scan_dpi = (dpi_x, dpi_y) if np.ndim(dpi) else dpi_x
    return SynthScan(image=image, dpi=scan_dpi, parts=parts, linear=linear, settings=settings)


# --------------------------------------------------------------------------------------
# saving
# --------------------------------------------------------------------------------------


def _png_with_phys(png: bytes, dpi_xy: tuple[float, float]) -> bytes:
    """Insert a pHYs chunk (pixels per metre) after IHDR, as the PNG spec stores resolution."""
    ppm = [round(d / 0.0254) for d in dpi_xy]
    body = b"pHYs" + ppm[0].to_bytes(4, "big") + ppm[1].to_bytes(4, "big") + b"\x01"
    chunk = (9).to_bytes(4, "big") + body + zlib.crc32(body).to_bytes(4, "big")
    ihdr_end = 8 + 4 + 4 + 13 + 4  # signature, length, type, IHDR data, CRC
    return png[:ihdr_end] + chunk + png[ihdr_end:]


def save_scan(
    scan: SynthScan,
    path: str | os.PathLike[str],
    *,
    dpi: float | tuple[float, float] | Literal["omit"] | None = None,
    quality: int = 95,
) -> Path:
    """Save a synthetic scan as PNG, TIFF or JPEG (chosen by the suffix), atomically.

    Parameters
    ----------
    scan : SynthScan
    path : path-like
        Target file; suffix ``.png``, ``.tif``/``.tiff`` or ``.jpg``/``.jpeg``.
    dpi : float, (float, float), "omit" or None
        Resolution to record; None records the scan's own DPI, ``"omit"`` writes
        none (to test files without a resolution).
    quality : int
        JPEG quality (1..100).

    Returns
    -------
    Path
        The written file.

    Notes
    -----
    - PNG stores pixels per metre as whole numbers (pHYs chunk), so 300 dpi is
      written as 11811 px/m and reads back as 11811 x 0.0254 = 299.9994 dpi.
    - JPEG (JFIF) stores whole dots per inch; JPEG holds 8-bit samples only.
    - TIFF stores rational XResolution/YResolution with ResolutionUnit inch;
      16-bit colour TIFF goes through OpenCV, which takes whole DPI only.
    - Colour images are RGB in memory and on disk.
    """
    from PIL import Image  # local: only saving needs pillow

    target = Path(path)
    suffix = target.suffix.lower()
    kind = {".png": "PNG", ".tif": "TIFF", ".tiff": "TIFF", ".jpg": "JPEG", ".jpeg": "JPEG"}.get(suffix)
    if kind is None:
        raise OptionError("unknown image suffix; use .png, .tif, .tiff, .jpg or .jpeg", path=str(target))
    dpi_xy: tuple[float, float] | None
    if isinstance(dpi, str):
        if dpi != "omit":
            raise OptionError(f"dpi must be a number, a pair, None or 'omit', got {dpi!r}")
        dpi_xy = None
    else:
        dpi_xy = _positive_pair(scan.dpi if dpi is None else dpi, "dpi")
    image = np.ascontiguousarray(scan.image)
    wide = image.dtype == np.uint16
    is_colour = image.ndim == 3
    good_shape = image.ndim == 2 or (is_colour and image.shape[2] == 3)
    if image.dtype not in (np.uint8, np.uint16) or not good_shape:
        raise OptionError("scan.image must be an (H, W) or (H, W, 3) uint8/uint16 array", path=str(target))
    if kind == "JPEG" and wide:
        raise OptionError(
            "JPEG holds 8-bit samples only; render with bit_depth=8 or save as .png/.tif", path=str(target)
        )
    if not 1 <= int(quality) <= 100:
        raise OptionError(f"quality must be 1..100, got {quality!r}", path=str(target))

    if wide and is_colour:
        # pillow has no 16-bit RGB mode; OpenCV writes it (BGR order in its API).
        import cv2

        bgr = image[:, :, ::-1]
        if kind == "PNG":
            ok, buf = cv2.imencode(".png", bgr)
            data = buf.tobytes() if ok else b""
            if ok and dpi_xy is not None:
                data = _png_with_phys(data, dpi_xy)
        else:
            params: list[int] = []
            if dpi_xy is not None:
                if any(abs(d - round(d)) > 1e-9 for d in dpi_xy):
                    raise OptionError(
                        "16-bit colour TIFF takes whole DPI only; give a whole dpi or save as .png", path=str(target)
                    )
                params = [
                    cv2.IMWRITE_TIFF_RESUNIT, 2,
                    cv2.IMWRITE_TIFF_XDPI, int(round(dpi_xy[0])),
                    cv2.IMWRITE_TIFF_YDPI, int(round(dpi_xy[1])),
                ]  # fmt: skip
            ok, buf = cv2.imencode(".tiff", bgr, params)
            data = buf.tobytes() if ok else b""
        if not ok:
            raise OutputError("OpenCV could not encode the image", path=str(target))
    else:
        pil = Image.fromarray(image)  # uint8 -> L/RGB, uint16 grey -> I;16
        options: dict[str, Any] = {}
        if dpi_xy is not None:
            options["dpi"] = dpi_xy
        if kind == "JPEG":
            options["quality"] = int(quality)
        bio = io.BytesIO()
        pil.save(bio, format=kind, **options)
        data = bio.getvalue()
    write_atomic(target, data)
    return target
